#!/usr/bin/env bash
# Whole-program test of `radmode inspect`: $1 = radmode binary, $2 = source dir.
# Generated models go through the same reader as user tables; the checks compare with
# published values (physics.md section 7) and analytic results, and exercise the exit status
# of --fail-if-unstable and the error paths.
set -u
bin="$(cd "$(dirname "$1")" && pwd)/$(basename "$1")"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fail=0
die() { echo "FAIL: $*" >&2; fail=1; }
py=/usr/bin/python3

"$bin" make polytrope --index 3 --points 800 --output "$tmp/n3.txt" || die "make n3"
"$bin" make uniform --gamma1 1.3 --points 400 --output "$tmp/u13.txt" || die "make u13"
"$bin" make uniform --gamma1 1.6666666666666667 --points 400 --output "$tmp/u53.txt" || die "make u53"

# --- text report: units and sections ------------------------------------------------------
"$bin" inspect "$tmp/n3.txt" > "$tmp/n3.out" 2> "$tmp/n3.err"
rc=$?
[ "$rc" = 0 ] || die "inspect n3 exit $rc: $(cat "$tmp/n3.err")"
for want in 'Msun' 'Rsun' ' g cm^-3' 'dynamical' ' s = ' ' h' 'hydrostatic residual' \
            'Gamma1 criterion' 'compactness' 'Newtonian:          STABLE' \
            'post-Newtonian:     STABLE' 'Warnings: none' '# generator = polytrope'; do
  grep -qF -- "$want" "$tmp/n3.out" || die "text report lacks '$want'"
done
grep -qiE '\bnan\b|\binf\b' "$tmp/n3.out" && die "text report contains nan/inf"

# --- JSON: keys, values against published numbers -------------------------------------
"$bin" inspect "$tmp/n3.txt" --json > "$tmp/n3.json" || die "inspect --json exit $?"
if [ -x "$py" ]; then
  "$py" - "$tmp/n3.json" <<'EOF' || die "n3 JSON checks"
import json, sys
d = json.load(open(sys.argv[1]))
need = ("version model mass_g radius_cm mean_density_g_cm3 rho_c_over_mean t_dyn_s t_kepler_s "
        "t_freefall_s t_sound_s hse_residual_max gamma1_pressure_weighted gamma1_min "
        "gamma1_below_4_3_zones sigma2_homologous compactness pn_coefficient "
        "gamma1_critical_pn verdict warnings").split()
missing = [k for k in need if k not in d]
assert not missing, missing
# Chandrasekhar 1939 (Table 4): rho_c/rho_mean = 54.1825 for n = 3.
assert abs(d["rho_c_over_mean"] / 54.1825 - 1) < 2e-4, d["rho_c_over_mean"]
# physics.md section 2 (nominal Sun): t_dyn = 3260 s, t_K = 1593 s, t_ff = 1769 s.
for k, v in (("t_dyn_s", 3260), ("t_kepler_s", 1593), ("t_freefall_s", 1769)):
    assert abs(d[k] / v - 1) < 1e-3, (k, d[k])
# Chandrasekhar 1964 (from memory): K = 1.1245 for n = 3.
assert abs(d["pn_coefficient"] - 1.1245) < 5e-4, d["pn_coefficient"]
assert d["verdict"]["newtonian"] == "stable"
assert d["verdict"]["post_newtonian"] == "stable"
assert d["warnings"] == []
assert d["model"]["metadata"]["generator"] == "polytrope"
EOF
fi

# --- unstable uniform sphere: analytic growth time, exit status ---------------------------
"$bin" inspect "$tmp/u13.txt" --json > "$tmp/u13.json"
rc=$?
[ "$rc" = 0 ] || die "inspect u13 without --fail-if-unstable must exit 0, got $rc"
if [ -x "$py" ]; then
  "$py" - "$tmp/u13.json" <<'EOF' || die "u13 JSON checks"
import json, math, sys
d = json.load(open(sys.argv[1]))
v = d["verdict"]
assert v["newtonian"] == "unstable" and v["unstable"] is True
G = 6.67430e-8
unit = G * d["mass_g"] / d["radius_cm"] ** 3
# Sterne 1937: omega0^2 = (3 Gamma1 - 4) G M / R^3; e-folding time 1/sqrt(-omega0^2).
w2 = (3 * 1.3 - 4) * unit
g = v["growing_modes"][0]
assert g["label"] == "F"
assert abs(g["efolding_time_s"] * math.sqrt(-w2) - 1) < 5e-3, g["efolding_time_s"]
assert abs(d["sigma2_homologous"] + 0.1) < 1e-4
z = d["gamma1_below_4_3_zones"]
assert len(z) == 1 and z[0]["r_inner_over_R"] == 0 and z[0]["r_outer_over_R"] == 1
codes = [w["code"] for w in d["warnings"]]
assert "gamma1_mean_below_4_3" in codes, codes
EOF
fi
"$bin" inspect "$tmp/u13.txt" --fail-if-unstable > /dev/null
rc=$?
[ "$rc" = 20 ] || die "--fail-if-unstable on an unstable model: expected 20, got $rc"
"$bin" inspect "$tmp/u53.txt" --fail-if-unstable > /dev/null
rc=$?
[ "$rc" = 0 ] || die "--fail-if-unstable on a stable model: expected 0, got $rc"
grep -q 'WARNING \[gamma1_mean_below_4_3\]' <("$bin" inspect "$tmp/u13.txt") \
  || die "text report does not mark the warning"

# --- output file ---------------------------------------------------------------------------
"$bin" inspect "$tmp/u53.txt" --json -o "$tmp/out.json" > "$tmp/stdout" || die "-o exit $?"
[ -s "$tmp/out.json" ] || die "-o wrote nothing"
[ -s "$tmp/stdout" ] && die "-o also wrote to standard output"

# --- errors --------------------------------------------------------------------------------
"$bin" inspect "$tmp/no_such_model.txt" > /dev/null 2> "$tmp/err"
rc=$?
[ "$rc" = 3 ] || die "missing file: expected exit 3, got $rc"
grep -q 'no_such_model.txt' "$tmp/err" || die "missing file: message does not name the file"

awk '/^#/ { print; next } !h { h = 1; print; next } { if (++c == 3) $1 = "1.0x"; print }' \
  "$tmp/u53.txt" > "$tmp/bad.txt"
"$bin" inspect "$tmp/bad.txt" > /dev/null 2> "$tmp/err"
rc=$?
[ "$rc" = 4 ] || die "bad number: expected exit 4, got $rc ($(cat "$tmp/err"))"
grep -q 'bad.txt:' "$tmp/err" || die "bad number: message does not name file and line"

for bad in "--hse-warn -1" "--pn-energy foo" "--marginal 2"; do
  # shellcheck disable=SC2086
  "$bin" inspect "$tmp/u53.txt" $bad -o "$tmp/never.json" > /dev/null 2> "$tmp/err"
  rc=$?
  [ "$rc" = 2 ] || die "$bad: expected exit 2, got $rc"
  opt=${bad%% *}
  grep -q -- "${opt#--}" "$tmp/err" || die "$bad: message does not name the option: $(cat "$tmp/err")"
  [ -e "$tmp/never.json" ] && die "$bad: left an output file"
done

# --- the cautions that go with every verdict are in the help of inspect and modes ----------
for cmd in inspect modes; do
  "$bin" "$cmd" --help > "$tmp/help.txt" 2>&1 || die "$cmd --help exit $?"
  grep -qF 'not pulsational (non-adiabatic)' "$tmp/help.txt" || die "$cmd --help lacks the adiabatic caution"
  grep -qF 'post-Newtonian line' "$tmp/help.txt" || die "$cmd --help lacks the relativistic caution"
done

exit $fail
