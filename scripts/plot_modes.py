#!/usr/bin/python3
"""Plot radial eigenfunctions written by `radmode modes MODEL --profiles FILE`.

Draws, against r/R (or m/M with --against m), one panel each for xi = delta r/r, delta P/P and the weight function of
every mode in the profiles file, and saves a PNG. Needs Debian's python3-matplotlib (run it
with /usr/bin/python3). The file format is described in docs/modes.md.

    /usr/bin/python3 scripts/plot_modes.py profiles.csv --output modes.png
"""
import argparse
import csv
import re
import sys

# "# F: dP_P at R = -19.4; the regular surface condition gives -(4 + sigma^2) xi(R) = -13.3"
SURFACE_NOTE = re.compile(r"^#\s*(\S+): dP_P at R = (\S+); .* = (\S+)$")


def read_profiles(path):
    """Returns (metadata dict, {(order, label): {column: [floats]}}) in file order; metadata
    "surface" maps a mode label to the surface value of delta P/P its surface condition gives."""
    meta = {"surface": {}}
    modes = {}
    header = None
    with open(path, newline="") as f:
        for lineno, line in enumerate(f, start=1):
            line = line.rstrip("\n")
            if not line:
                continue
            if line.startswith("#"):
                note = SURFACE_NOTE.match(line)
                if note:
                    meta["surface"][note.group(1)] = float(note.group(3))
                    continue
                body = line[1:].strip()
                if "=" in body:
                    key, _, value = body.partition("=")
                    meta[key.strip()] = value.strip()
                continue
            fields = next(csv.reader([line]))
            if header is None:
                header = fields
                for required in ("order", "label", "r_over_R", "m_over_M", "xi", "dP_P", "weight"):
                    if required not in header:
                        raise ValueError(f"{path}:{lineno}: header lacks column '{required}'")
                continue
            if len(fields) != len(header):
                raise ValueError(f"{path}:{lineno}: expected {len(header)} fields, "
                                 f"found {len(fields)}")
            row = dict(zip(header, fields))
            key = (int(row["order"]), row["label"])
            cols = modes.setdefault(key, {name: [] for name in header[2:]})
            for name in header[2:]:
                try:
                    cols[name].append(float(row[name]))
                except ValueError:
                    raise ValueError(f"{path}:{lineno}: column {name}: "
                                     f"'{row[name]}' is not a number") from None
    if header is None:
        raise ValueError(f"{path}: no header line found")
    if not modes:
        raise ValueError(f"{path}: no mode rows found")
    return meta, modes


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("profiles", help="profiles file from radmode modes --profiles")
    parser.add_argument("--output", default="modes.png", help="PNG file to write")
    parser.add_argument("--title", default=None, help="figure title (default: the model)")
    parser.add_argument("--max-modes", type=int, default=6, help="plot at most this many modes")
    parser.add_argument("--against", choices=("r", "m"), default="r",
                        help="horizontal axis: r (r/R, default) or m (m/M)")
    args = parser.parse_args(argv)
    if args.max_modes < 1:
        parser.error("--max-modes: expected a number >= 1")

    try:
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        print("plot_modes.py: matplotlib is missing; run with /usr/bin/python3 "
              "(Debian package python3-matplotlib)", file=sys.stderr)
        return 3
    try:
        meta, modes = read_profiles(args.profiles)
    except (OSError, ValueError) as e:
        print(f"plot_modes.py: error: {e}", file=sys.stderr)
        return 3

    fig, axes = plt.subplots(3, 1, figsize=(7.0, 9.0), sharex=True)
    for (order, label), cols in list(modes.items())[: args.max_modes]:
        x = cols["r_over_R" if args.against == "r" else "m_over_M"]
        axes[0].plot(x, cols["xi"], label=label)
        line, = axes[1].plot(x, cols["dP_P"], label=label)
        if label in meta["surface"]:
            axes[1].plot([1.0], [meta["surface"][label]], "o", mfc="none",
                         color=line.get_color())
        w = cols["weight"]
        scale = max(abs(v) for v in w) or 1.0
        axes[2].plot(x, [v / scale for v in w], label=label)
    axes[0].set_ylabel(r"$\xi = \delta r / r$  ($\xi(R)=1$)")
    axes[1].set_ylabel(r"$\delta P / P$")
    if any(meta["surface"].values()):
        axes[1].set_title(r"open circles: $-(4+\sigma^2)\,\xi(R)$ from the surface condition",
                          fontsize="small")
    axes[2].set_ylabel("weight function\n(scaled to max |w| = 1)")
    axes[2].set_xlabel("r / R" if args.against == "r" else "m / M")
    for ax in axes:
        ax.axhline(0.0, color="0.6", linewidth=0.6)
        ax.grid(True, linewidth=0.3)
    axes[0].legend(title="mode", ncol=3, fontsize="small")
    title = args.title or meta.get("model", args.profiles)
    fig.suptitle(f"Radial modes: {title}")
    fig.tight_layout()
    try:
        fig.savefig(args.output, dpi=110)
    except OSError as e:
        print(f"plot_modes.py: error: cannot write {args.output}: {e}", file=sys.stderr)
        return 3
    return 0


if __name__ == "__main__":
    sys.exit(main())
