#!/usr/bin/python3
"""Plot coverage against p for one method and a few n from a covergrid cube.

An example to copy: it reads the cube with h5py only (Debian's python3-h5py),
finds each axis by its name and selects by axis values, not positions.
  scripts/plot-coverage.py out/demo.h5 --method wilson --n 10 --n 40 -o wilson.png
Exit status 2 (with the values that exist) for a value not on an axis."""
import argparse
import os
import sys

import h5py
import matplotlib
import numpy as np

matplotlib.use("Agg")  # files only, no display needed
import matplotlib.pyplot as plt

ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
ap.add_argument("cube")
ap.add_argument("--method", required=True, help="method label, as on the cube's method axis")
ap.add_argument("--n", type=int, action="append", required=True,
                help="sample size; repeat for more")
ap.add_argument("--side", help="default: the first on the axis")
ap.add_argument("--level", type=float, help="nominal level, e.g. 0.95; default: the first")
ap.add_argument("--model", help="model label; default: the first")
ap.add_argument("-o", "--output", required=True, help="PNG or PDF, by extension")
ap.add_argument("--csv", help="also write the plotted series (n, p, coverage) to this file")
args = ap.parse_args()


def fail(msg):
    print(f"plot-coverage: {msg}", file=sys.stderr)
    sys.exit(2)


def index_of(name, wanted):
    """Position of the value `wanted` on the axis `name`; the first one when wanted is None."""
    values = axis[name]
    if wanted is None:
        return 0
    found = np.flatnonzero(np.isclose(values, wanted) if name == "level" else values == wanted)
    if found.size == 0:
        fail(f"--{name} {wanted} is not in {args.cube}; the {name} axis holds: "
             + ", ".join(str(v) for v in values))
    return int(found[0])


def save_atomic(path, write):  # write to a temporary name, rename when complete
    write(path + ".part")
    os.replace(path + ".part", path)


if os.path.splitext(args.output)[1].lower() not in (".png", ".pdf"):
    fail(f"-o {args.output}: the name must end in .png or .pdf")
for opt, path in (("-o", args.output), ("--csv", args.csv)):
    if path and not os.path.isdir(os.path.dirname(os.path.abspath(path))):
        fail(f"{opt} {path}: the folder does not exist")
try:
    f = h5py.File(args.cube, "r")
except OSError as e:
    fail(f"cannot open {args.cube} as HDF5: {e}")
with f:
    simulated = "exact" not in f  # a Monte Carlo-only cube
    source = "mc/coverage" if simulated else "exact/coverage"
    if f.attrs.get("format") not in ("covergrid-cube", b"covergrid-cube") or source not in f:
        fail(f"{args.cube} is not a covergrid cube with /{source}")
    cov = f[source]
    axis = {d.label: d[0][()] for d in cov.dims}  # each dimension's attached scale, by name
    axis = {k: v.astype(str) if v.dtype.kind in "OS" else v for k, v in axis.items()}
    at = {k: index_of(k, getattr(args, k)) for k in ("model", "side", "level", "method")}
    rows = {n: cov[at["model"], at["side"], at["level"], at["method"], index_of("n", n), :]
            for n in args.n}  # shape [model, side, level, method, n, p]; one row over p per n
    p = axis["p"]

level = axis["level"][at["level"]]
title = (f"{args.method}: {'simulated coverage' if simulated else 'coverage'}, "
         f"{axis['side'][at['side']]}, nominal {level:g}, {axis['model'][at['model']]} model")
fig, ax = plt.subplots(figsize=(8, 5), dpi=100)
for n, row in rows.items():
    ax.plot(p, row, lw=1, label=f"n = {n}")
ax.axhline(level, color="black", ls="--", lw=0.8, label=f"nominal {level:g}")
ax.set(xlabel="true proportion p", ylabel="coverage probability", title=title, xlim=(p[0], p[-1]))
ax.grid(alpha=0.3)
ax.legend(loc="best")
fig.subplots_adjust(bottom=0.2)
fig.text(0.02, 0.02, "Coverage is a long-run property of the procedure: the share of intervals,\n"
         "over repeated samples at a fixed p, that contain p. It says nothing about one interval.",
         fontsize=8, color="dimgray")
save_atomic(args.output, lambda tmp: fig.savefig(tmp, format=args.output[-3:].lower()))
if args.csv:
    def write_csv(tmp):
        with open(tmp, "w") as out:
            out.write("n,p,coverage\n")
            for n, row in rows.items():
                out.writelines(f"{n},{float(q)!r},{float(c)!r}\n" for q, c in zip(p, row))
    save_atomic(args.csv, write_csv)
print(f"{args.output}: {title} (from /{source})")
