#!/usr/bin/python3
"""Cross-check of include/radmode/constants.hpp against astropy.constants.

Usage: constants_astropy.py --radmode BIN --source DIR   (BIN is not used here)
Exit 0: all values agree; 1: a mismatch; 77: astropy is not installed (ctest: skipped).

Sources: astropy.constants with its default CODATA 2018 / IAU 2015 Resolution B3 sets
(Debian's python3-astropy), the same sets constants.hpp names.
"""
import argparse
import math
import re
import sys

try:
    import astropy.constants as ac
    import astropy.units as au
except ImportError:
    print("astropy not installed: skipping")
    sys.exit(77)


def parse_header(path):
    """name -> value for `inline constexpr double NAME = NUMBER;` lines, and for
    `NAME = A / B;` where A and B are names already read."""
    values = {}
    pattern = re.compile(r"inline\s+constexpr\s+double\s+(\w+)\s*=\s*([^;]+);")
    with open(path, encoding="utf-8") as f:
        for line in f:
            m = pattern.search(line)
            if not m:
                continue
            name, expr = m.group(1), m.group(2).strip()
            try:
                values[name] = float(expr)
            except ValueError:
                q = re.fullmatch(r"(\w+)\s*/\s*(\w+)", expr)
                if q and q.group(1) in values and q.group(2) in values:
                    values[name] = values[q.group(1)] / values[q.group(2)]
    return values


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--radmode", required=False)
    ap.add_argument("--source", required=True)
    args = ap.parse_args()
    ours = parse_header(args.source + "/include/radmode/constants.hpp")

    # (name in constants.hpp, astropy value in cgs, relative tolerance, what it is)
    checks = [
        ("G", ac.G.cgs.value, 1e-12, "Newton's constant, CODATA 2018"),
        ("c_light", ac.c.cgs.value, 1e-15, "speed of light (exact)"),
        ("GM_sun", ac.GM_sun.cgs.value, 1e-12, "nominal solar GM, IAU 2015 B3"),
        ("R_sun", ac.R_sun.cgs.value, 1e-12, "nominal solar radius, IAU 2015 B3"),
        ("L_sun", ac.L_sun.cgs.value, 1e-12, "nominal solar luminosity, IAU 2015 B3"),
        ("M_sun", ac.M_sun.cgs.value, 1e-12, "solar mass GM_sun / G"),
        ("boltzmann_k", ac.k_B.cgs.value, 1e-12, "Boltzmann constant (exact)"),
        ("atomic_mass_unit_g", ac.u.cgs.value, 1e-10, "atomic mass unit, CODATA 2018"),
        ("radiation_a", (4 * ac.sigma_sb / ac.c).cgs.value, 1e-10, "radiation constant 4 sigma/c"),
        ("day_s", (1 * au.day).to(au.s).value, 0, "day in seconds"),
        ("hour_s", (1 * au.hour).to(au.s).value, 0, "hour in seconds"),
        ("pi", math.pi, 1e-16, "pi"),
    ]
    failed = 0
    for name, ref, tol, what in checks:
        if name not in ours:
            print(f"FAIL {name}: not found in constants.hpp ({what})")
            failed += 1
            continue
        rel = abs(ours[name] - ref) / abs(ref)
        status = "ok  " if rel <= tol else "FAIL"
        if rel > tol:
            failed += 1
        print(f"{status} {name:20s} radmode {ours[name]:.10e}  astropy {ref:.10e}  rel {rel:.1e}"
              f"  (tol {tol:.0e}; {what})")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
