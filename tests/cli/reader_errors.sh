#!/usr/bin/env bash
# Whole-program test of the model-table reader through the subcommands that read a model
# (`radmode modes`, and `radmode inspect` when present): $1 = radmode binary, $2 = source dir.
# Each damaged table must stop the run with its documented exit code (docs/table-format.md)
# and a message naming file, line and column; a foreign table read with --columns/--skip must
# give the same report as the equivalent native table.
set -u
bin="$(cd "$(dirname "$1")" && pwd)/$(basename "$1")"
tmp="$(mktemp -d)"
trap '[ -n "${KEEP_TMP:-}" ] && echo "kept $tmp" || rm -rf "$tmp"' EXIT
cd "$tmp" || exit 1
fail=0
die() { echo "FAIL: $*" >&2; fail=1; }

# expect CODE TEXT ARGS...: radmode ARGS exits with CODE and its stderr contains TEXT.
expect() {
  local code="$1" text="$2"
  shift 2
  "$bin" "$@" > out.txt 2> err.txt
  local got=$?
  [ "$got" = "$code" ] || die "radmode $*: exit $got, expected $code; stderr: $(cat err.txt)"
  grep -qF -- "$text" err.txt || die "radmode $*: stderr lacks '$text': $(cat err.txt)"
  [ -s out.txt ] && [ "$code" != 0 ] && die "radmode $*: printed a report despite the error"
  return 0
}

subs=()
for s in inspect modes; do "$bin" --help | grep -q "^  $s " && subs+=("$s"); done
[ ${#subs[@]} -gt 0 ] || { echo "FAIL: no subcommand that reads a model"; exit 1; }

"$bin" make polytrope --index 1.5 --points 60 --output good.txt || { echo "FAIL: make"; exit 1; }
h=$(grep -n '^r m P rho Gamma1$' good.txt | cut -d: -f1)
[ -n "$h" ] || { echo "FAIL: no header line in good.txt"; exit 1; }
L=$((h + 10)) # file line of the 10th point

# damage FILE AWK-PROGRAM: a copy of good.txt changed by awk (NR = file line).
damage() { awk -v L="$L" -v H="$h" "$2" good.txt > "$1"; }

for sub in "${subs[@]}"; do
  "$bin" "$sub" good.txt > /dev/null || die "$sub good.txt exit $?"

  damage bad_number.txt 'NR == L { $4 = "1.5x" } { print }'
  expect 4 "bad_number.txt:$L: column 4 (rho): expected a number, found '1.5x'" "$sub" bad_number.txt

  damage nan.txt 'NR == L { $3 = "nan" } { print }'
  expect 5 "nan.txt:$L: column 3 (P)" "$sub" nan.txt

  damage no_gamma1.txt 'NR == H { $5 = "G1" } { print }'
  expect 6 "no_gamma1.txt:$h: missing required column(s) Gamma1" "$sub" no_gamma1.txt

  head -n $((h + 9)) good.txt > few.txt
  expect 7 "few.txt: expected at least 10 points, found 9" "$sub" few.txt

  damage swapped.txt 'NR == L { keep = $0; next } NR == L + 1 { print; print keep; next } { print }'
  expect 8 "swapped.txt:$((L + 1)): column 1 (r)" "$sub" swapped.txt

  damage gamma0.txt 'NR == L { $5 = "0" } { print }'
  expect 9 "gamma0.txt:$L: column 5 (Gamma1): expected Gamma1 > 0" "$sub" gamma0.txt

  damage negp.txt 'NR == L { $3 = "-1" } { print }'
  expect 10 "negp.txt:$L: column 3 (P): expected P >= 0" "$sub" negp.txt

  damage ragged.txt 'NR == L { $5 = "" } { print }'
  expect 11 "ragged.txt:$L: expected 5 fields as in the header (line $h), found 4" "$sub" ragged.txt

  expect 3 "missing.txt" "$sub" missing.txt
  mkdir -p adir
  expect 3 "adir" "$sub" adir

  # Option errors name the option.
  expect 2 "--columns" "$sub" good.txt --columns "r=1,m=2,P=3,rho=4"
  expect 2 "--columns" "$sub" good.txt --columns "r=1:Msun,m=2,P=3,rho=4,Gamma1=5"
  expect 2 "--skip" "$sub" good.txt --skip -1
  expect 6 "column 9 (Gamma1)" "$sub" good.txt --columns "r=1,m=2,P=3,rho=4,Gamma1=9"
done

sub="${subs[0]}"
# Foreign table: two banner lines, surface first, columns permuted, an extra text column,
# radius and mass in solar units, log10 of P and rho.
awk -v H="$h" 'BEGIN { print "== invented structure dump =="; print "step 42 of something" }
  NR > H { n++; r[n] = $1; m[n] = $2; p[n] = $3; d[n] = $4; g[n] = $5 }
  END {
    Rsun = 6.957e10; Msun = 1.3271244e26 / 6.67430e-8
    print "zone lgP G1 flag R M lgRho"
    for (i = n; i >= 1; i--) {
      lp = p[i] > 0 ? log(p[i]) / log(10) : -99; ld = d[i] > 0 ? log(d[i]) / log(10) : -99
      printf "%d %.17g %.17g x%d %.17g %.17g %.17g\n", i, lp, g[i], i, r[i] / Rsun, m[i] / Msun, ld
    }
  }' good.txt > foreign.txt
# The native table holding exactly what the reader makes of foreign.txt (same double
# operations: value * unit, 10^x), so that both must give the identical report.
awk 'BEGIN { Rsun = 6.957e10; Msun = 1.3271244e26 / 6.67430e-8; print "r m P rho Gamma1" }
  NR > 3 { rows[NR] = sprintf("%.17g %.17g %.17g %.17g %.17g", $5 * Rsun, $6 * Msun, 10 ^ $2, 10 ^ $7, $3) }
  END { for (i = NR; i > 3; i--) print rows[i] }' foreign.txt > native.txt
"$bin" "$sub" native.txt > native_report.txt || die "$sub native.txt exit $?"
"$bin" "$sub" foreign.txt --skip 2 \
  --columns "r=R:Rsun,m=M:Msun,P=lgP:log10,rho=lgRho:log10,Gamma1=G1" > foreign_report.txt \
  || die "$sub foreign.txt by name exit $?: $(cat foreign_report.txt)"
# Reports name the file and file lines of points; those differ (foreign.txt runs surface
# first), everything else must agree.
same() { sed -E -e "/$1/d" -e 's/line [0-9]+/line N/g' "$2"; }
diff <(same native.txt native_report.txt) <(same foreign.txt foreign_report.txt) \
  > /dev/null || die "foreign and native reports differ"
"$bin" "$sub" foreign.txt --skip 3 \
  --columns "r=5:Rsun,m=6:Msun,P=2:log10,rho=7:log10,Gamma1=3" > foreign3_report.txt \
  || die "$sub foreign.txt by number exit $?"
diff <(same foreign.txt foreign_report.txt) <(same foreign.txt foreign3_report.txt) \
  > /dev/null || die "reports by name and by number differ"
# Without the map, the foreign table is refused with a clear message.
expect 6 "missing required column(s)" "$sub" foreign.txt --skip 2

exit $fail
