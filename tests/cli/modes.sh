#!/usr/bin/env bash
# Whole-program test of `radmode modes` (docs/modes.md): text, JSON, CSV and profile output on
# a generated n = 3 polytrope, error exits for bad options and files, atomic --output.
# $1 = radmode binary, $2 = source directory.
set -u
radmode="$1"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fails=0
fail() { echo "FAIL: $*" >&2; fails=$((fails + 1)); }

# expect_exit CODE PATTERN CMD...: runs CMD, checks the exit status and that stderr names PATTERN.
expect_exit() {
  local want="$1" pattern="$2"
  shift 2
  "$@" >"$tmp/out" 2>"$tmp/err"
  local got=$?
  [ "$got" = "$want" ] || fail "'$*' exited $got, expected $want; stderr: $(cat "$tmp/err")"
  grep -q -- "$pattern" "$tmp/err" || fail "'$*': stderr does not mention '$pattern': $(cat "$tmp/err")"
}

"$radmode" make polytrope --index 3 --points 600 --output "$tmp/poly3.txt" ||
  { echo "FAIL: cannot generate the model" >&2; exit 1; }
model="$tmp/poly3.txt"

# --- text report ------------------------------------------------------------------------
"$radmode" modes "$model" >"$tmp/text" 2>"$tmp/err" || fail "text report exited $?: $(cat "$tmp/err")"
for want in "$model" "t_dyn" "points" "period[d]" "nu[uHz]" "Q[d]" "Period ratios P_k/P_0" "1O/F"; do
  grep -qF -- "$want" "$tmp/text" || fail "text report lacks '$want'"
done
# Five modes by default: F, 1O .. 4O each start a row of the table.
for label in F 1O 2O 3O 4O; do
  grep -qE "^$label +[0-9]" "$tmp/text" || fail "text report has no row for $label"
done
grep -qiE 'nan|inf' "$tmp/text" && fail "text report contains NaN or inf"

# --- JSON -------------------------------------------------------------------------------
"$radmode" modes "$model" --count 3 --json >"$tmp/json" 2>"$tmp/err" ||
  fail "--json exited $?: $(cat "$tmp/err")"
/usr/bin/python3 - "$tmp/json" <<'EOF' || fail "JSON check failed"
import json, math, sys
def no_nan(c):
    raise ValueError("non-standard number " + c)
doc = json.load(open(sys.argv[1]), parse_constant=no_nan)
for key in ("version", "model", "options", "modes", "period_ratios", "verdict", "warnings"):
    assert key in doc, "missing top-level key " + key
for key in ("file", "metadata", "mass_g", "radius_cm", "t_dyn_s", "points"):
    assert key in doc["model"], "missing model key " + key
modes = doc["modes"]
assert [m["label"] for m in modes] == ["F", "1O", "2O"], modes
need = ("order label nodes omega2_s2 sigma2 period_s period_d frequency_uHz frequency_cd Q_d "
        "omega_t_dyn inertia error_estimate_rel order_check stable growth_rate_s growth_time_s "
        "growth_time_t_dyn").split()
for m in modes:
    for key in need:
        assert key in m, "mode lacks " + key
    assert m["stable"] is True and m["growth_rate_s"] is None
    # Unit relations (1 d = 86400 s; physics.md section 2: Q = 0.115836 d / sigma).
    assert abs(m["period_d"] * 86400 / m["period_s"] - 1) < 1e-12
    assert abs(m["frequency_uHz"] * 1e-6 * m["period_s"] - 1) < 1e-12
    assert abs(m["Q_d"] * math.sqrt(m["sigma2"]) / 0.115836 - 1) < 1e-5
ratios = doc["period_ratios"]
assert [r["label"] for r in ratios] == ["1O", "2O"]
assert all(0 < r["ratio"] < 1 for r in ratios)
EOF

# --- CSV --------------------------------------------------------------------------------
"$radmode" modes "$model" --count 2 --csv >"$tmp/csv" 2>"$tmp/err" || fail "--csv exited $?"
head -1 "$tmp/csv" | grep -q '^order,label,nodes,omega2_s2,sigma2,period_s' ||
  fail "CSV header: $(head -1 "$tmp/csv")"
[ "$(wc -l <"$tmp/csv")" = 3 ] || fail "CSV should have a header and 2 rows"

# --- profiles ---------------------------------------------------------------------------
"$radmode" modes "$model" --count 2 --profiles "$tmp/prof.csv" >/dev/null 2>"$tmp/err" ||
  fail "--profiles exited $?: $(cat "$tmp/err")"
[ -s "$tmp/prof.csv" ] || fail "profiles file not written"
grep -q '^order,label,r_over_R,m_over_M,xi,dP_P,drho_rho' "$tmp/prof.csv" || fail "profiles header"
grep -q '^1,1O,1,1,1,' "$tmp/prof.csv" || fail "profiles: 1O does not end with r/R = 1, xi = 1"

# The plotting script reads it (only where Debian's matplotlib is installed).
if /usr/bin/python3 -c 'import matplotlib' 2>/dev/null; then
  /usr/bin/python3 "$2/scripts/plot_modes.py" "$tmp/prof.csv" --output "$tmp/modes.png" \
    2>"$tmp/err" || fail "plot_modes.py exited $?: $(cat "$tmp/err")"
  [ "$(head -c 4 "$tmp/modes.png" | tail -c 3)" = "PNG" ] || fail "plot_modes.py wrote no PNG"
fi

# --- window -----------------------------------------------------------------------------
f1=$(/usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); print(d["modes"][1]["frequency_uHz"])' "$tmp/json")
lo=$(/usr/bin/python3 -c "print($f1*0.99)"); hi=$(/usr/bin/python3 -c "print($f1*1.01)")
"$radmode" modes "$model" --window "${lo}:${hi}uHz" --csv >"$tmp/win" 2>"$tmp/err" ||
  fail "--window exited $?: $(cat "$tmp/err")"
[ "$(tail -n +2 "$tmp/win" | cut -d, -f2)" = "1O" ] || fail "--window around 1O: $(cat "$tmp/win")"

"$radmode" modes "$model" --window 1:2uHz >"$tmp/empty" 2>"$tmp/err" ||
  fail "an empty window exited $?: $(cat "$tmp/err")"
grep -q "No modes found in the window" "$tmp/empty" || fail "empty window not reported"
grep -q "solved for separately" "$tmp/empty" || fail "verdict without the fundamental's solve"

# --- surface condition, shooting check --------------------------------------------------
# With P = 0 at R both surface conditions select the same (regular) solution (physics.md 4).
"$radmode" modes "$model" --count 2 --surface fixed-pressure --verify --json >"$tmp/fixed" \
  2>"$tmp/err" || fail "--surface fixed-pressure --verify exited $?: $(cat "$tmp/err")"
/usr/bin/python3 - "$tmp/json" "$tmp/fixed" <<'EOF2' || fail "fixed-pressure / verify check failed"
import json, sys
a = json.load(open(sys.argv[1]))
b = json.load(open(sys.argv[2]))
assert b["options"]["surface"] == "fixed-pressure" and b["options"]["verify"] is True
for ma, mb in zip(a["modes"], b["modes"]):
    assert abs(ma["sigma2"] / mb["sigma2"] - 1) < 1e-3, (ma["sigma2"], mb["sigma2"])
assert [v["agrees"] for v in b["verify"]] == [True, True], b["verify"]
EOF2

# --- an unstable model: Gamma1 = 1.3 uniform sphere, sigma0^2 = 3 Gamma1 - 4 = -0.1 ---------
"$radmode" make uniform --gamma1 1.3 --points 300 --output "$tmp/unstable.txt" ||
  fail "cannot generate the unstable model"
"$radmode" modes "$tmp/unstable.txt" --count 2 --json --fail-if-unstable >"$tmp/ujson" 2>"$tmp/err"
code=$?
[ "$code" = 20 ] || fail "--fail-if-unstable on an unstable model exited $code, expected 20"
/usr/bin/python3 - "$tmp/ujson" <<'EOF2' || fail "unstable JSON check failed"
import json, sys
def no_nan(c):
    raise ValueError("non-standard number " + c)
d = json.load(open(sys.argv[1]), parse_constant=no_nan)
f = d["modes"][0]
assert f["label"] == "F" and f["stable"] is False
assert abs(f["sigma2"] + 0.1) < 1e-4, f["sigma2"]          # Sterne 1937 / physics.md 7
for key in ("period_s", "period_d", "frequency_uHz", "frequency_cd", "Q_d", "omega_t_dyn"):
    assert f[key] is None, key
assert f["growth_rate_s"] > 0 and abs(f["growth_rate_s"] * f["growth_time_s"] - 1) < 1e-12
assert d["period_ratios"] == []
EOF2
"$radmode" modes "$tmp/unstable.txt" --count 1 >"$tmp/utext" 2>"$tmp/err" ||
  fail "without --fail-if-unstable an unstable model should exit 0"
grep -q "Growing modes" "$tmp/utext" || fail "text report lacks the growing-mode table"

# --- bad input --------------------------------------------------------------------------
expect_exit 2 "--count" "$radmode" modes "$model" --count 0
expect_exit 2 "--window" "$radmode" modes "$model" --window 20-200uHz
expect_exit 2 "--window" "$radmode" modes "$model" --window 200:20uHz
expect_exit 2 "--window" "$radmode" modes "$model" --window 20:200parsec
expect_exit 2 "--surface" "$radmode" modes "$model" --surface sticky
expect_exit 2 "--json" "$radmode" modes "$model" --json --csv
expect_exit 3 "$tmp/nonexistent.txt" "$radmode" modes "$tmp/nonexistent.txt"

# --- atomic output ----------------------------------------------------------------------
expect_exit 3 "$tmp/nodir/report.txt" "$radmode" modes "$model" --output "$tmp/nodir/report.txt"
[ -e "$tmp/nodir" ] && fail "--output into a missing directory created something"
"$radmode" modes "$model" --count 1 --output "$tmp/report.txt" >"$tmp/out" 2>&1 ||
  fail "--output exited $?"
[ -s "$tmp/report.txt" ] || fail "--output file is empty"
[ -s "$tmp/out" ] && fail "--output also wrote to stdout: $(cat "$tmp/out")"
ls "$tmp" | grep -q '\.tmp-' && fail "a temporary file was left behind"

[ "$fails" = 0 ] && echo "modes.sh: all checks passed"
exit $((fails > 0))
