#!/usr/bin/env bash
# Whole-program tests of `radmode match`. $1 = radmode binary, $2 = source dir.
#
# Models: uniform-density spheres (M = 1 Msun, Gamma1 = 5/3) of several radii. Their periods
# are known in closed form (Sterne 1937, MNRAS 97, 582): sigma_k^2 = Gamma1 (k+1)(2k+3) - 4,
# Pi_k = 2 pi (R^3/GM)^(1/2) / sigma_k. The "star" is synthesized from that formula (not from
# radmode) for R = 1.5 Rsun, so the test checks the whole chain against an outside result.
set -u
radmode="$1"
src="$2"
fail=0
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
[ -n "${MATCH_TEST_DEBUG:-}" ] && echo "tmp=$tmp" && trap - EXIT

check() { # check DESCRIPTION COMMAND...
  local what="$1"; shift
  if "$@"; then echo "ok: $what"; else echo "FAIL: $what"; fail=1; fi
}
contains() { grep -qF -- "$2" "$1"; }

# Uniform sphere in the native table format (cgs), N points uniform in r.
# P = (2 pi/3) G rho^2 R^2 (1 - x^2), m = M x^3 (physics.md section 6).
sphere() { # sphere FILE RADIUS_RSUN N [GAMMA1]
  awk -v rr="$2" -v n="$3" -v g1="${4:-1.6666666666666667}" 'BEGIN {
    G = 6.67430e-8; M = 1.3271244e26 / G; R = 6.957e10 * rr; pi = 3.14159265358979;
    rho = 3 * M / (4 * pi * R^3);
    printf "# test uniform sphere, R = %s Rsun\n", rr;
    print "r m P rho Gamma1";
    for (i = 0; i < n; i++) {
      x = i / (n - 1);
      printf "%.17g %.17g %.17g %.17g %.17g\n", x * R, M * x^3,
             (2 * pi / 3) * G * rho^2 * R^2 * (1 - x^2), rho, g1;
    }
  }' > "$1"
}
# Sterne period of order K in days for M = 1 Msun, radius RR Rsun.
sterne_period() { # sterne_period K RR
  awk -v k="$1" -v rr="$2" 'BEGIN {
    GM = 1.3271244e26; R = 6.957e10 * rr; pi = 3.14159265358979;
    s2 = (5 / 3) * (k + 1) * (2 * k + 3) - 4;
    printf "%.9f", 2 * pi * sqrt(R^3 / GM) / sqrt(s2) / 86400 }'
}

mkdir -p "$tmp/grid"
: > "$tmp/grid/list.txt"
for rr in 1.00 1.25 1.50 1.75 2.00; do
  sphere "$tmp/grid/u$rr.txt" "$rr" 400
  echo "u$rr.txt" >> "$tmp/grid/list.txt"
done

p0=$(sterne_period 0 1.5)
p1=$(sterne_period 1 1.5)
p2=$(sterne_period 2 1.5)
# Uncertainty 1e-4 relative: far above the solver's error at 400 points, far below the
# 25 % steps of the grid. Small offsets (0.3 sigma, -0.5 sigma) stand in for noise.
awk -v a="$p0" -v b="$p1" 'BEGIN {
  print "# star = Test Star (synthesized from the Sterne formula, R = 1.5 Rsun)";
  printf "%.9f d %.9f   # F\n", a * (1 + 0.3e-4), a * 1e-4;
  printf "%.9f d %.9f\n\n", b * (1 - 0.5e-4), b * 1e-4 }' > "$tmp/star.txt"

# --- ranking over the grid ---------------------------------------------------------------
"$radmode" match --list "$tmp/grid/list.txt" --observed "$tmp/star.txt" --json \
  -o "$tmp/m.json" --jobs 2 > "$tmp/out" 2> "$tmp/err"
check "grid run exits 0" test $? -eq 0
if [ -x /usr/bin/python3 ]; then
  /usr/bin/python3 - "$tmp/m.json" > "$tmp/py" 2>&1 <<'EOF'
import json, sys
d = json.load(open(sys.argv[1]))
r = d["ranking"]
assert len(r) == 5, len(r)
assert r[0]["model"].endswith("u1.50.txt"), r[0]["model"]
assert [a["order"] for a in r[0]["assignments"]] == [0, 1], r[0]["assignments"]
assert [a["label"] for a in r[0]["assignments"]] == ["F", "1O"]
assert r[0]["chi2"] < 5, r[0]["chi2"]
assert all(r[i]["chi2"] <= r[i + 1]["chi2"] for i in range(4))
# P1/P0 of the uniform sphere with Gamma1 = 5/3: sigma0/sigma1 = sqrt(1 / (38/3)) = 0.28098
# (Sterne 1937).
q = r[0]["ratios"][0]
assert q["name"] == "P1/P0" and abs(q["model"] - (3 / 38) ** 0.5) < 1e-4, q
assert d["failed"] == 0 and d["failures"] == []
for key in ("observed", "label", "order", "model_period_d", "residual_sigma"):
    assert key in r[0]["assignments"][0], key
print("json ok")
EOF
  check "JSON ranking puts the R = 1.5 Rsun sphere first with F and 1O" contains "$tmp/py" "json ok"
  [ -s "$tmp/py" ] && ! contains "$tmp/py" "json ok" && cat "$tmp/py"
fi

"$radmode" match --list "$tmp/grid/list.txt" --observed "$tmp/star.txt" --top 2 > "$tmp/out" 2>&1
check "text report: best model line" grep -qE '^1 .*u1\.50\.txt  F\([-+][0-9.]+\) 1O' "$tmp/out"
check "text report: --top 2 keeps two rows" test "$(grep -cE '^[0-9]+ ' "$tmp/out")" -eq 2
check "text report names the star" contains "$tmp/out" "of Test Star"
check "text report shows the observed and model P1/P0" contains "$tmp/out" "P1/P0: observed"

# --- the same star in other units gives the same chi^2 ------------------------------------
"$radmode" match "$tmp/grid/u1.50.txt" --observed "$tmp/star.txt" --json -o "$tmp/d.json"
awk -v a="$p0" -v b="$p1" 'BEGIN {
  nu0 = 1e6 / (a * (1 + 0.3e-4) * 86400); nu1 = 1 / (b * (1 - 0.5e-4));
  printf "%.12g uHz %.12g F\n%.12g c/d %.12g\n", nu0, nu0 * 1e-4, nu1, nu1 * 1e-4 }' \
  > "$tmp/star_freq.txt"
"$radmode" match "$tmp/grid/u1.50.txt" --observed "$tmp/star_freq.txt" --json -o "$tmp/f.json"
c_d=$(sed -n 's/^ *"chi2": *\([^,]*\),*$/\1/p' "$tmp/d.json" | head -1)
c_f=$(sed -n 's/^ *"chi2": *\([^,]*\),*$/\1/p' "$tmp/f.json" | head -1)
check "uHz / c/d input gives the chi^2 of day input ($c_d vs $c_f)" \
  awk -v a="$c_d" -v b="$c_f" 'BEGIN { exit !(a > 0 && (a - b) / a < 1e-3 && (b - a) / a < 1e-3) }'

# --- a labelled observation is respected ---------------------------------------------------
"$radmode" match "$tmp/grid/u1.50.txt" --period "${p0}d+-0.0001" --period "${p1}d+-0.0001:2O" \
  > "$tmp/out" 2>&1
check "label 2O is kept even though 1O fits" grep -qE '^1 .*F\([-+0-9.]+\) 2O\(' "$tmp/out"

# --- an unstable fundamental is not matched, and the report says so -------------------------
# Gamma1 = 1.3 < 4/3: omega0^2 = (3 Gamma1 - 4) GM/R^3 < 0 (classical; Ledoux, Sterne 1937).
sphere "$tmp/unstable.txt" 1.5 400 1.3
"$radmode" match "$tmp/unstable.txt" --period "${p1}d+-0.001" > "$tmp/out" 2>&1
check "unstable model still runs" test $? -eq 0
check "the unstable F is listed as not matched" grep -qE 'not matched: F: omega\^2 <= 0' "$tmp/out"
check "... and the observation goes to an overtone" grep -qE '^1 .*unstable\.txt  1O\(' "$tmp/out"
"$radmode" match "$tmp/unstable.txt" --period "${p0}d+-0.001:F" > "$tmp/out" 2>&1
check "a label on the unstable F makes a failure row (exit 21)" test $? -eq 21
check "... saying why" grep -qE 'failed .*no_assignment: .*labelled F but that mode is excluded' "$tmp/out"

"$radmode" match "$tmp/grid/u1.50.txt" --observed "$tmp/none_such.txt" > /dev/null 2> "$tmp/err"
check "a missing observation file exits 3 naming it" test $? -eq 3
check "... naming it" contains "$tmp/err" "none_such.txt"

# --- failures: bad model row, exit 21; bad observations, nothing written ------------------
sphere "$tmp/grid/bad.txt" 1.3 100
sed -i '20s/^[^ ]*/1.0x5/' "$tmp/grid/bad.txt"
"$radmode" match "$tmp/grid/u1.50.txt" "$tmp/grid/bad.txt" "$tmp/grid/u1.00.txt" \
  --observed "$tmp/star.txt" > "$tmp/out" 2> "$tmp/err"
check "a bad model makes exit status 21" test $? -eq 21
check "the bad model has a failure row" grep -qE '^failed .*bad\.txt: bad_number' "$tmp/out"
check "the other models are still ranked" grep -qE '^2 .*u1\.00\.txt' "$tmp/out"

printf '0.5 d 0.001 F\n0.3 d\n' > "$tmp/bad_obs.txt"
"$radmode" match "$tmp/grid/u1.50.txt" --observed "$tmp/bad_obs.txt" -o "$tmp/none.txt" \
  > "$tmp/out" 2> "$tmp/err"
check "malformed observation line exits 11" test $? -eq 11
check "the error names file and line" contains "$tmp/err" "bad_obs.txt:2:"
check "no output file after an error" test ! -e "$tmp/none.txt"

printf '0.5 d 0.001 F\n0.3 d abc\n' > "$tmp/bad_obs2.txt"
"$radmode" match "$tmp/grid/u1.50.txt" --observed "$tmp/bad_obs2.txt" > /dev/null 2> "$tmp/err"
check "a field that is not a number exits 4" test $? -eq 4
check "... naming the column" contains "$tmp/err" "bad_obs2.txt:2: column 3 (uncertainty)"

"$radmode" match "$tmp/grid/u1.50.txt" --period "0.5 days+-0.1" > /dev/null 2> "$tmp/err"
check "a malformed --period exits 2" test $? -eq 2
check "... naming it" contains "$tmp/err" "--period #1"

"$radmode" match "$tmp/grid/u1.50.txt" > /dev/null 2> "$tmp/err"
check "no observations at all is a usage error" test $? -eq 2

# --- homology fit: the R = 1 Rsun sphere fitted to the R = 1.5 Rsun star -------------------
"$radmode" match "$tmp/grid/u1.00.txt" --observed "$tmp/star.txt" --fit-radius --json \
  -o "$tmp/fit.json" 2> "$tmp/err"
check "fit run exits 0" test $? -eq 0
if [ -x /usr/bin/python3 ]; then
  /usr/bin/python3 - "$tmp/fit.json" > "$tmp/py" 2>&1 <<'EOF'
import json, sys
f = json.load(open(sys.argv[1]))["ranking"][0]["fit"]
assert f["ok"]
# Homology: same structure at 1.5 Rsun. Allow 4 sigma (the offsets are under 1 sigma).
assert abs(f["radius_rsun"] - 1.5) < 4 * f["radius_sigma_rsun"], f
assert 0 < f["radius_sigma_rsun"] < 1e-3
rho = 1.3271244e26 / 6.67430e-8 * 3 / (4 * 3.141592653589793 * (1.5 * 6.957e10) ** 3)
assert abs(f["rho_mean_g_cm3"] - rho) < 4 * f["rho_mean_sigma_g_cm3"], (f, rho)
print("fit ok")
EOF
  check "fitted radius 1.5 Rsun and mean density within their uncertainties" contains "$tmp/py" "fit ok"
  [ -s "$tmp/py" ] && ! contains "$tmp/py" "fit ok" && cat "$tmp/py"
fi

# --- plot script ---------------------------------------------------------------------------
if /usr/bin/python3 -c 'import matplotlib' 2> /dev/null; then
  /usr/bin/python3 "$src/scripts/plot_ratios.py" "$tmp/m.json" -o "$tmp/r.png" > /dev/null
  check "plot_ratios.py writes a PNG" test -s "$tmp/r.png"
fi

exit $fail
