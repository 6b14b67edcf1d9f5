#!/usr/bin/env bash
# Whole-program test of `radmode make`: $1 = radmode binary, $2 = source dir.
# Writes each kind of model, checks the table layout and that bad options exit 2 with a
# message naming the option and leave no file behind.
set -u
bin="$(cd "$(dirname "$1")" && pwd)/$(basename "$1")"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fail=0
die() { echo "FAIL: $*" >&2; fail=1; }

# --- good runs --------------------------------------------------------------------------
"$bin" make polytrope --index 1.5 --points 300 --output "$tmp/p15.txt" || die "polytrope exit $?"
[ -f "$tmp/p15.txt" ] || die "polytrope wrote no file"
head -1 "$tmp/p15.txt" | grep -qx '# radmode model table' || die "first line"
grep -qx '# generator = polytrope' "$tmp/p15.txt" || die "generator metadata"
grep -qx '# n = 1.5' "$tmp/p15.txt" || die "n metadata"
grep -qx 'r m P rho Gamma1' "$tmp/p15.txt" || die "header line"
rows=$(grep -v '^#' "$tmp/p15.txt" | tail -n +2 | wc -l)
[ "$rows" = 300 ] || die "expected 300 rows, found $rows"
# first row is the centre, last row the surface with P = 0 and rho = 0
grep -v '^#' "$tmp/p15.txt" | sed -n 2p | awk '{ if ($1 != 0 || $2 != 0) exit 1 }' || die "centre row"
tail -1 "$tmp/p15.txt" | awk '{ if ($1 != 69570000000 || $3 != 0 || $4 != 0) exit 1 }' || die "surface row"
# no NaN or inf anywhere
grep -qiE 'nan|inf' "$tmp/p15.txt" && die "non-finite value in table"

# standard output is the default and matches the file except for the recorded --output
"$bin" make polytrope --index 1.5 --points 300 > "$tmp/p15_stdout.txt" || die "stdout exit"
diff <(grep -v '^# command' "$tmp/p15.txt") <(grep -v '^# command' "$tmp/p15_stdout.txt") > /dev/null \
  || die "file and standard output differ"

# the recorded command regenerates the same table
cmd=$(sed -n 's/^# command = radmode //p' "$tmp/p15.txt" | sed 's/ --output .*//')
# shellcheck disable=SC2086
(cd "$tmp" && "$bin" $cmd --output "$tmp/p15_again.txt") || die "recorded command failed"
diff <(grep -v '^# command' "$tmp/p15.txt") <(grep -v '^# command' "$tmp/p15_again.txt") > /dev/null \
  || die "recorded command does not regenerate the table"

"$bin" make uniform --gamma1 1.4 --mass 2 --radius 3 --points 50 --output "$tmp/u.txt" || die "uniform exit"
grep -qx '# generator = uniform' "$tmp/u.txt" || die "uniform generator metadata"
grep -qx '# gamma1 = 1.4' "$tmp/u.txt" || die "uniform gamma1 metadata"

"$bin" make standard --mass 5 --mu 0.6 --points 100 --output "$tmp/s.txt" || die "standard exit"
grep -qx 'r m P rho Gamma1 T nabla_ad u' "$tmp/s.txt" || die "standard header"
grep -q '^# beta = 0\.' "$tmp/s.txt" || die "standard beta metadata"

"$bin" make polytrope --help | grep -q -- '--index' || die "polytrope --help"
"$bin" make standard --help | grep -q -- '--mu' || die "standard --help"

# --- bad options: exit 2, message names the option, no file left -------------------------
check_bad() { # expected-option-text args...
  local want="$1"; shift
  local out="$tmp/bad.txt"
  rm -f "$out"
  "$bin" "$@" --output "$out" > "$tmp/stdout" 2> "$tmp/stderr"
  local rc=$?
  [ "$rc" = 2 ] || die "$* : expected exit 2, got $rc"
  grep -q -- "$want" "$tmp/stderr" || die "$* : message does not name $want: $(cat "$tmp/stderr")"
  [ -e "$out" ] && die "$* : left a file behind"
  ls "$tmp" | grep -q 'bad.txt.tmp' && die "$* : left a temporary file behind"
  return 0
}
check_bad --index make polytrope --index 5
check_bad --index make polytrope --index -1
check_bad --index make polytrope
check_bad --mass make polytrope --index 1 --mass -2
check_bad --mass make standard --mass abc
check_bad --radius make uniform --radius 0
check_bad --points make uniform --points 5
check_bad --points make uniform --points -3
check_bad --gamma1 make uniform --gamma1 0.9
check_bad --mu make standard --mu 100

# unwritable output: I/O error (exit 3) naming the path
"$bin" make uniform --output "$tmp/no/such/dir/u.txt" 2> "$tmp/stderr"
rc=$?
[ "$rc" = 3 ] || die "unwritable output: expected exit 3, got $rc"
grep -q "no/such/dir/u.txt" "$tmp/stderr" || die "unwritable output: path not named"

# the shipped demo model is exactly what its recorded command produces today
demo="$2/models/polytrope_n3.txt"
if [ -f "$demo" ]; then
  cmd=$(sed -n 's/^# command = radmode //p' "$demo" | sed 's/ --output .*//')
  # shellcheck disable=SC2086
  "$bin" $cmd --output "$tmp/demo.txt" || die "demo command failed"
  diff <(grep -vE '^# (command|radmode_version) ' "$demo") \
       <(grep -vE '^# (command|radmode_version) ' "$tmp/demo.txt") > /dev/null \
    || die "models/polytrope_n3.txt differs from what its recorded command writes"
else
  die "models/polytrope_n3.txt missing"
fi

exit $fail
