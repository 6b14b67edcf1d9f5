#!/usr/bin/env bash
# Whole-program tests of `radmode track` and `radmode join`.
# $1 = radmode binary, $2 = source dir.
#
# The track: uniform-density spheres (M = 1 Msun, R = 1 Rsun) whose constant Gamma1 steps
# down through 4/3, one Myr apart. For the uniform sphere omega0^2 = (3 Gamma1 - 4) GM/R^3
# (classical; Sterne 1937, MNRAS 97, 582), so the fundamental sigma^2 changes sign exactly
# where Gamma1 = 4/3; with Gamma1 = 1.36 - 0.01 t/Myr that is t = 2.6667 Myr.
set -u
radmode="$1"
fail=0
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT

check() { # check DESCRIPTION COMMAND...
  local what="$1"; shift
  if "$@"; then echo "ok: $what"; else echo "FAIL: $what"; fail=1; fi
}

# Uniform sphere in the native table format (cgs), N points uniform in r.
# P = (2 pi/3) G rho^2 R^2 (1 - x^2), m = M x^3 (physics.md section 6).
sphere() { # sphere FILE GAMMA1 AGE_MYR N
  awk -v g1="$2" -v age="$3" -v n="$4" 'BEGIN {
    G = 6.67430e-8; M = 1.3271244e26 / G; R = 6.957e10; pi = 3.14159265358979;
    rho = 3 * M / (4 * pi * R^3);
    printf "# generator = test uniform sphere\n# age_myr = %s\n# gamma1 = %s\n", age, g1;
    print "r m P rho Gamma1";
    for (i = 0; i < n; i++) {
      x = i / (n - 1);
      printf "%.17g %.17g %.17g %.17g %s\n", x * R, M * x^3,
             (2 * pi / 3) * G * rho^2 * R^2 * (1 - x^2), rho, g1;
    }
  }' > "$1"
}

mkdir -p "$tmp/models"
: > "$tmp/models/list.txt"
echo "# the test track, in age order" >> "$tmp/models/list.txt"
for i in 0 1 2 3 4 5 6; do
  g1=$(awk -v i="$i" 'BEGIN { printf "%.2f", 1.36 - 0.01 * i }')
  sphere "$tmp/models/m$i.txt" "$g1" "$i" 400
  echo "m$i.txt" >> "$tmp/models/list.txt"
  if [ "$i" = 2 ]; then # a corrupt model in the middle of the track
    sphere "$tmp/models/corrupt.txt" 1.345 2.5 400
    sed -i '10s/^[^ ]*/1.0x5/' "$tmp/models/corrupt.txt"
    echo "   corrupt.txt   " >> "$tmp/models/list.txt"
  fi
done

# --- one run; a corrupt model gets its row, the rest run, exit status 21 -------------------
"$radmode" track --list "$tmp/models/list.txt" --count 3 --jobs 1 -o "$tmp/j1.csv" 2> "$tmp/j1.err"
rc=$?
cat "$tmp/j1.err"
check "exit status 21 when a model failed" [ "$rc" = 21 ]
check "one row per model plus settings and header" [ "$(grep -vc '^#' "$tmp/j1.csv")" = 9 ]
check "failed count printed" grep -q "1 of 8 models failed" "$tmp/j1.err"
check "corrupt model row: status bad_number and the line named" \
  grep -qF "3,$tmp/models/corrupt.txt,,,,bad_number,\"$tmp/models/corrupt.txt:10: column 1 (r)" "$tmp/j1.csv"
check "rows in input order" \
  [ "$(grep -v '^#' "$tmp/j1.csv" | tail -n +2 | cut -d, -f1 | tr '\n' ' ')" = "0 1 2 3 4 5 6 7 " ]
check "no NaN or inf in the table" bash -c "! grep -qiE 'nan|inf' '$tmp/j1.csv'"
check "onset of instability found between the models with Gamma1 = 1.34 and 1.33" \
  grep -qE "fundamental sigma\^2 changes sign \(stable_to_unstable\) between models 2 and 4: at age_myr = 2\.6" "$tmp/j1.err"
check "<Gamma1> crosses 4/3 at the same age" \
  grep -qE "crosses 4/3 \(falls_below_4/3\) between models 2 and 4: at age_myr = 2\.666[67]" "$tmp/j1.err"
check "stable column flips from true to false" \
  [ "$(grep -v '^#' "$tmp/j1.csv" | tail -n +2 | awk -F, '{print $(NF-2)}' | tr '\n' ' ')" = "true true true  false false false false " ]

# --- determinism across thread counts ------------------------------------------------------
"$radmode" track --list "$tmp/models/list.txt" --count 3 --jobs 2 -q -o "$tmp/j2.csv"
check "byte-identical tables for --jobs 1 and 2" cmp "$tmp/j1.csv" "$tmp/j2.csv"
"$radmode" track --list "$tmp/models/list.txt" --count 3 -q > "$tmp/stdout.csv"
check "standard output by default, same table" cmp "$tmp/j1.csv" "$tmp/stdout.csv"

# --- shards and join -----------------------------------------------------------------------
for s in 0 1 2; do
  "$radmode" track --list "$tmp/models/list.txt" --count 3 --shard "$s/3" -q -o "$tmp/s$s.csv"
done
check "shard 1/3 holds models 1, 4, 7" \
  [ "$(grep -v '^#' "$tmp/s1.csv" | tail -n +2 | cut -d, -f1 | tr '\n' ' ')" = "1 4 7 " ]
"$radmode" join "$tmp/s2.csv" "$tmp/s0.csv" "$tmp/s1.csv" -q -o "$tmp/joined.csv"
check "join exit status 21 (a failed model)" [ $? = 21 ]
check "joined shards equal the single run" cmp "$tmp/j1.csv" "$tmp/joined.csv"
"$radmode" join "$tmp/s0.csv" "$tmp/s1.csv" -q -o "$tmp/part.csv" 2> "$tmp/part.err"
check "join with a shard missing fails (bad_format, 11)" [ $? = 11 ]
check "... and says which model is missing" grep -q "model index 2 is missing" "$tmp/part.err"
check "... and writes nothing" [ ! -e "$tmp/part.csv" ]

# --- JSON ----------------------------------------------------------------------------------
"$radmode" track --list "$tmp/models/list.txt" --count 3 --json -q -o "$tmp/t.json"
"$radmode" join "$tmp/s0.csv" "$tmp/s1.csv" "$tmp/s2.csv" --json -q -o "$tmp/joined.json"
check "JSON of joined shards equals the single run's" cmp "$tmp/t.json" "$tmp/joined.json"
if /usr/bin/python3 -c 'import json' 2>/dev/null; then
  check "JSON parses and holds the onset by age" /usr/bin/python3 - "$tmp/t.json" <<'EOF'
import json, sys
d = json.load(open(sys.argv[1]))
c = [x for x in d["summary"]["crossings"] if x["quantity"] == "sigma2_0"]
assert len(c) == 1, c
# Tolerance 0.02 Myr: the solver's sigma0^2 error for a 400-point table is of order 1e-4,
# and sigma0^2 changes by 0.03 per Myr along this track.
assert abs(c[0]["at_age_yr"] / 1e6 - (1.36 - 4 / 3) / 0.01) < 0.02, c
assert d["rows"][3]["status"] == "bad_number"
assert d["rows"][3]["period_d_0"] is None
rates = [r for r in d["summary"]["period_rates"] if r["order"] == 1]
assert len(rates) == 6, rates  # 7 good models with order 1: 6 intervals
EOF
fi

# --- errors --------------------------------------------------------------------------------
"$radmode" track "$tmp/models/m0.txt" --count 0 -q > /dev/null 2> "$tmp/e.err"
check "--count 0 is a usage error (2) naming --count" \
  bash -c "[ $? = 2 ] && grep -q -- --count '$tmp/e.err'"
"$radmode" track "$tmp/models/m0.txt" --shard 3/3 -q > /dev/null 2> "$tmp/e.err"
check "--shard 3/3 is a usage error (2)" bash -c "[ $? = 2 ] && grep -q -- --shard '$tmp/e.err'"
"$radmode" track --list "$tmp/none.txt" -q > /dev/null 2> "$tmp/e.err"
check "missing list file: io error (3) naming it" bash -c "[ $? = 3 ] && grep -q none.txt '$tmp/e.err'"
"$radmode" track "$tmp/models/m0.txt" -q -o "$tmp/no/dir/out.csv" 2> "$tmp/e.err"
check "output into a missing directory: io error (3) before any work" [ $? = 3 ]
"$radmode" track -q > /dev/null 2> "$tmp/e.err"
check "no models: usage error (2)" [ $? = 2 ]

# --- Ctrl-C: nothing written under the final name, exit status 130 ---------------------------
sphere "$tmp/big.txt" 1.5 0 4000
for i in $(seq 1 20000); do echo "../big.txt"; done > "$tmp/models/long.txt"
"$radmode" track --list "$tmp/models/long.txt" --count 5 --jobs 2 -o "$tmp/int.csv" 2> "$tmp/int.err" &
pid=$!
sleep 1
kill -INT "$pid"
wait "$pid"
rc=$?
if [ "$rc" = 0 ]; then
  echo "SKIP: the long track finished before the interrupt arrived"
else
  check "interrupted run exits 130" [ "$rc" = 130 ]
  check "interrupted run says nothing was written" grep -q "nothing written" "$tmp/int.err"
  check "interrupted run leaves no file" bash -c "! ls '$tmp' | grep -q '^int.csv'"
fi

exit $fail
