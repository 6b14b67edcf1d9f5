#!/usr/bin/env python3
"""Outside cross-check of `radmode match` unit conversions with astropy.units.

Called by ctest as
    /usr/bin/python3 match_units_astropy.py --radmode BIN --source DIR
Exit status: 0 agreement, 1 disagreement or failure, 77 skipped (astropy missing).

Observations are given on the command line in every unit radmode accepts (d, h, min, s, uHz,
c/d), with uncertainties, and the periods and period uncertainties radmode reports in its
JSON (`observed.items[].period_d`, `sigma_d`) are compared with astropy's conversion of the
same quantities: a period converts directly to days; a frequency nu to P = 1/nu with
sigma_P = sigma_nu / nu^2 (first-order propagation), all through astropy.units.
Tolerance 1e-12 relative (both are double-precision conversions of the same numbers).
"""

import argparse
import json
import os
import subprocess
import sys
import tempfile


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--radmode", required=True)
    ap.add_argument("--source", required=True)
    args = ap.parse_args()
    try:
        import astropy.units as u
    except ImportError:
        print("astropy not available: skipped")
        return 77

    model = os.path.join(args.source, "models", "grid", "standard_m2_r2.4.txt")
    cases = [  # value, sigma, radmode unit, astropy unit
        (0.1067, 2e-6, "d", u.day),
        (2.5608, 4e-5, "h", u.hour),
        (153.65, 0.003, "min", u.min),
        (9218.9, 0.17, "s", u.s),
        (108.47, 0.002, "uHz", u.uHz),
        (9.3721, 0.0004, "c/d", u.day**-1),  # astropy: cycle is an angle; c/d = 1/d
    ]
    specs = []
    for value, sigma, unit, _ in cases:
        specs += ["--period", f"{value!r}{unit}+-{sigma!r}"]
    with tempfile.TemporaryDirectory() as tmp:
        out = os.path.join(tmp, "m.json")
        cmd = [args.radmode, "match", model, "--json", "-o", out, "--count", "12"] + specs
        run = subprocess.run(cmd, capture_output=True, text=True)
        if run.returncode != 0:
            print("radmode failed:", run.returncode, run.stderr)
            return 1
        with open(out, encoding="utf-8") as f:
            items = json.load(f)["observed"]["items"]

    ok = True
    for (value, sigma, unit, aunit), item in zip(cases, items):
        q = value * aunit
        s = sigma * aunit
        if aunit.physical_type == "time":
            p_d = q.to_value(u.day)
            s_d = s.to_value(u.day)
        else:
            nu = q.to_value(u.day**-1)  # cycles per day
            snu = s.to_value(u.day**-1)
            p_d = 1.0 / nu
            s_d = snu / nu**2
        for name, mine, ref in (("period_d", item["period_d"], p_d),
                                ("sigma_d", item["sigma_d"], s_d)):
            rel = abs(mine - ref) / abs(ref)
            good = rel < 1e-12
            ok &= good
            print(f"{'ok' if good else 'FAIL'}: {value} {unit} +- {sigma}: {name} radmode "
                  f"{mine!r} astropy {ref!r} (rel {rel:.1e})")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
