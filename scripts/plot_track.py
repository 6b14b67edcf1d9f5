#!/usr/bin/python3
"""Plot a `radmode track --json` result: the periods of each radial order and the
fundamental sigma^2 against age (or model index when the track has no ages), with the
onset of dynamical instability (sign change of sigma0^2) marked.

    radmode track --list track.txt --json -o track.json
    /usr/bin/python3 scripts/plot_track.py track.json -o track.png

Needs Debian's python3-matplotlib (Agg backend, no display needed).
"""
import argparse
import json
import sys

try:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
except ImportError as e:
    sys.exit("plot_track: needs matplotlib (Debian python3-matplotlib): %s" % e)

AGE_UNITS = {"age_yr": 1.0, "age": 1.0, "age_myr": 1e6, "age_gyr": 1e9}
LABELS = ["F", "1O", "2O", "3O", "4O", "5O", "6O", "7O", "8O", "9O"]


def main():
    ap = argparse.ArgumentParser(description="Plot a radmode track (JSON output).")
    ap.add_argument("track", help="JSON written by radmode track --json (or radmode join --json)")
    ap.add_argument("-o", "--output", default="track.png", help="image file (default track.png)")
    ap.add_argument("--title", default=None, help="figure title")
    a = ap.parse_args()

    try:
        with open(a.track) as f:
            d = json.load(f)
        rows, summary = d["rows"], d["summary"]
        count = int(d["settings"]["count"])
    except (OSError, ValueError, KeyError) as e:
        sys.exit("plot_track: %s: not a radmode track JSON file (%s)" % (a.track, e))

    key = summary.get("age_key")
    unit = AGE_UNITS.get(key, 1.0)
    if key:
        xlabel = "age [Myr]"
        def xof(r):
            v = r.get(key)
            try:
                return float(v) * unit / 1e6
            except (TypeError, ValueError):
                return None
        def xcross(c):
            return None if c["at_age_yr"] is None else c["at_age_yr"] / 1e6
    else:
        xlabel = "model index"
        def xof(r):
            return float(r["index"])
        def xcross(c):
            return c["at_index"]

    fig, (ax1, ax2) = plt.subplots(2, 1, sharex=True, figsize=(7, 6.5),
                                   gridspec_kw={"height_ratios": [3, 2]})
    for k in range(count):
        pts = [(xof(r), r["period_d_%d" % k]) for r in rows]
        pts = [(x, p) for x, p in pts if x is not None and p is not None]
        if pts:
            xs, ps = zip(*pts)
            ax1.plot(xs, ps, "o-", ms=3, lw=1.2,
                     label=LABELS[k] if k < len(LABELS) else "%dO" % k)
    ax1.set_yscale("log")
    ax1.set_ylabel("period [d]")
    ax1.legend(title="radial order", fontsize=8, ncol=2)

    pts = [(xof(r), r["sigma2_0"]) for r in rows]
    pts = [(x, s) for x, s in pts if x is not None and s is not None]
    if pts:
        xs, ss = zip(*pts)
        ax2.plot(xs, ss, "o-", ms=3, color="k", lw=1.2, label=r"$\sigma_0^2$ (fundamental)")
    ax2.axhline(0, color="0.5", lw=0.8)
    ax2.set_ylabel(r"$\sigma_0^2 = \omega_0^2 R^3/(GM)$")
    ax2.set_xlabel(xlabel)

    failed = [xof(r) for r in rows if r["status"] != "ok" and xof(r) is not None]
    for x in failed:
        ax2.axvline(x, color="tab:orange", lw=0.8, ls=":")

    styles = {"sigma2_0": ("tab:red", "-", "onset: $\\sigma_0^2$ changes sign"),
              "gamma1_pressure_weighted": ("tab:blue", "--", r"$\langle\Gamma_1\rangle = 4/3$")}
    used = set()
    for c in summary["crossings"]:
        if c["quantity"] not in styles:
            continue
        x = xcross(c)
        if x is None:
            continue
        color, ls, label = styles[c["quantity"]]
        for ax in (ax1, ax2):
            ax.axvline(x, color=color, ls=ls, lw=1.2,
                       label=label if ax is ax2 and c["quantity"] not in used else None)
        used.add(c["quantity"])
    ax2.legend(fontsize=8)
    if a.title:
        fig.suptitle(a.title)
    fig.tight_layout()
    fig.savefig(a.output, dpi=110)
    print("plot_track: wrote", a.output)


if __name__ == "__main__":
    main()
