#!/usr/bin/python3
"""Period-ratio (Petersen) diagram and period comparison from `radmode match --json` output.

    scripts/plot_ratios.py MATCH.json [-o ratios.png] [--lines N]

Left panel: P_hi/P_lo against P_lo for every ranked model, where lo < hi are the two lowest
radial orders the best model assigns to the observations (F and 1O for a classical double-mode
pulsator: the usual P1/P0 against P0 diagram); the observed star on top with its error bars.
Right panel: period against radial order for the observed periodicities (at the orders the
best model gives them) and for the N best models.

With --fit-radius runs the model periods are scaled by each model's fitted period scale, so
the panels show the models at their fitted radii.

Uses Debian's python3-matplotlib (Agg backend, no display needed).
"""
import argparse
import json
import sys

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import matplotlib.ticker  # noqa: E402


def label(order):
    return "F" if order == 0 else f"{order}O"


def model_periods(entry):
    """{order: period_d} of a ranked model, scaled to the fitted radius when there is a fit."""
    scale = 1.0
    fit = entry.get("fit")
    if fit and fit.get("ok"):
        scale = fit["period_scale"]
    return {p["order"]: p["period_d"] * scale
            for p in entry["periods"] if p["usable"] and p["period_d"] is not None}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("match_json", help="output of radmode match --json")
    parser.add_argument("-o", "--output", default="ratios.png", help="PNG file to write")
    parser.add_argument("--lines", type=int, default=3,
                        help="models drawn in the period panel (best first)")
    args = parser.parse_args()

    try:
        with open(args.match_json, encoding="utf-8") as f:
            doc = json.load(f)
    except (OSError, json.JSONDecodeError) as e:
        sys.exit(f"plot_ratios.py: {args.match_json}: cannot read the match JSON: {e}")
    ranking = doc.get("ranking", [])
    if not ranking:
        sys.exit(f"plot_ratios.py: {args.match_json}: no ranked model to plot")
    best = ranking[0]
    observed = doc["observed"]["items"]
    star = doc["observed"].get("star") or doc["observed"].get("source", "observed")

    # Observed periods at the orders of the best model.
    obs_by_order = {}
    for a in best["assignments"]:
        o = observed[a["observed"] - 1]
        obs_by_order[a["order"]] = (o["period_d"], o["sigma_d"])
    orders = sorted(obs_by_order)

    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(12, 5))

    # Left: period-ratio diagram.
    if len(orders) >= 2:
        lo, hi = orders[0], orders[1]
        xs, ys, names = [], [], []
        for entry in ranking:
            p = model_periods(entry)
            if lo in p and hi in p:
                xs.append(p[lo])
                ys.append(p[hi] / p[lo])
                names.append(entry["model"])
        ax1.scatter(xs, ys, s=30, c="tab:blue", label="models", zorder=2)
        for i, (x, y, n) in enumerate(zip(xs, ys, names)):
            # Alternate above/below and slant the names so that close models stay legible.
            below = i % 2 == 1
            ax1.annotate(n.split("/")[-1].rsplit(".", 1)[0], (x, y), fontsize=7,
                         xytext=(3, -6 if below else 5), textcoords="offset points",
                         rotation=-35 if below else 35, color="tab:blue",
                         va="top" if below else "bottom")
        if (lo, hi) == (0, 1):
            # Observed double-mode pulsators (common practice; Alcock et al. 1995 Cepheids,
            # Soszynski et al. 2016 RRd, delta Scuti about 0.77 from memory).
            ax1.axhspan(0.70, 0.77, color="0.85", zorder=0,
                        label="double-mode pulsators, P1/P0 0.70-0.77")
        p_lo, s_lo = obs_by_order[lo]
        p_hi, s_hi = obs_by_order[hi]
        ratio = p_hi / p_lo
        s_ratio = ratio * ((s_lo / p_lo) ** 2 + (s_hi / p_hi) ** 2) ** 0.5
        ax1.errorbar([p_lo], [ratio], xerr=[s_lo], yerr=[s_ratio], fmt="*", ms=14,
                     color="tab:red", label=star, zorder=3)
        ax1.margins(0.08, 0.18)
        ax1.set_xlabel(f"P{lo} ({label(lo)}) [d]")
        ax1.set_ylabel(f"P{hi}/P{lo}  ({label(hi)}/{label(lo)})")
        ax1.set_title("Period ratio" + (" (models at fitted radius)"
                                        if doc["settings"].get("fit_radius") else ""))
        ax1.legend(fontsize=8)
    else:
        ax1.text(0.5, 0.5, "one observed mode:\nno period ratio", ha="center", va="center",
                 transform=ax1.transAxes)
        ax1.set_axis_off()
    ax1.grid(alpha=0.3)

    # Right: periods against radial order.
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    for i, entry in enumerate(ranking[: max(args.lines, 1)]):
        p = model_periods(entry)
        ks = sorted(p)
        ax2.plot(ks, [p[k] for k in ks], "o-", ms=4, lw=1, color=colours[i % len(colours)],
                 label=f"#{entry['rank']} {entry['model'].split('/')[-1]} "
                       f"(chi2 {entry['chi2']:.3g})")
    ax2.errorbar(orders, [obs_by_order[k][0] for k in orders],
                 yerr=[obs_by_order[k][1] for k in orders], fmt="*", ms=12, color="tab:red",
                 label=f"{star} (orders from the best model)", zorder=3)
    ax2.xaxis.set_major_locator(matplotlib.ticker.MaxNLocator(integer=True))
    ax2.set_xlabel("radial order k (0 = F)")
    ax2.set_ylabel("period [d]")
    ax2.set_yscale("log")
    ax2.set_title("Observed and model periods")
    ax2.legend(fontsize=7)
    ax2.grid(alpha=0.3, which="both")

    fig.tight_layout()
    fig.savefig(args.output, dpi=110)
    print(f"plot_ratios.py: wrote {args.output}")


if __name__ == "__main__":
    main()
