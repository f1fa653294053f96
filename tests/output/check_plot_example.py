#!/usr/bin/python3
"""The Python example scripts/plot-coverage.py, run on small cubes made by the
covergrid executable: the image is a valid PNG (or PDF) of the stated size, the
plotted series (--csv) equal the cube read here by position with h5py, a
Monte Carlo-only cube is plotted from /mc/coverage as "simulated", and a value
not on an axis exits 2 without touching the output. Checked with Debian 12's
python3-h5py 3.7.0, python3-matplotlib 3.6.3 and python3-pil 9.4.0 (versions
printed at the end). Usage: check_plot_example.py COVERGRID_EXE SCRIPT DIR"""
import csv
import os
import subprocess
import sys

import h5py
import matplotlib
import numpy as np
import PIL
from PIL import Image

exe, script, work = sys.argv[1], sys.argv[2], sys.argv[3]
os.makedirs(work, exist_ok=True)


def make_cube(name, evaluate):
    with open(os.path.join(work, name + ".toml"), "w") as f:
        f.write(f"""title = "plot example check"
seed = 31
[grid]
n = [5, 12, 30]
p = {{ from = 0.02, to = 0.98, count = 49 }}
levels = [0.9, 0.95]
sides = ["two-sided", "upper-bound"]
[evaluate]
{evaluate}
[[method]]
id = "wilson"
[[method]]
id = "wald"
[[method]]
id = "clopper-pearson"
[output]
cube = "{name}.h5"
tables = ""
""")
    cube = os.path.join(work, name + ".h5")
    if os.path.exists(cube):
        os.remove(cube)
    subprocess.run([exe, "run", os.path.join(work, name + ".toml"), "--quiet"], check=True,
                   stdout=subprocess.DEVNULL)
    return cube


def plot(*args):
    return subprocess.run([script, *args], capture_output=True, text=True)


def read_csv(path):
    with open(path) as f:
        rows = list(csv.DictReader(f))
    return ([int(r["n"]) for r in rows], np.array([float(r["p"]) for r in rows]),
            np.array([float(r["coverage"]) for r in rows]))


def check_series(csv_path, cube, dataset, pos, n_positions, n_values):
    """The CSV holds, n by n in the order asked, the cube's row at these positions."""
    ns, ps, cs = read_csv(csv_path)
    with h5py.File(cube, "r") as f:
        data = f[dataset]
        p = data.dims[data.ndim - 1][0][()]  # the p scale attached to the dataset
        want = np.concatenate([data[(*pos, k)] for k in n_positions])
        # Guard: the neighbouring level's row differs, so a wrong selection would show.
        other = (pos[0], pos[1], 1 - pos[2], pos[3], n_positions[0])
        assert not np.array_equal(data[other], data[(*pos, n_positions[0])])
    assert ns == [n for n in n_values for _ in p], ns[:5]
    assert np.array_equal(ps, np.tile(p, len(n_values)))
    # The CSV writes repr() of each float64, which reads back exactly: tolerance 0.
    err = np.max(np.abs(cs - want))
    assert np.array_equal(cs, want), f"{csv_path}: worst difference {err}"
    return cs


exact = make_cube("plot-exact", "exact = true")
png, pdf, series = (os.path.join(work, x) for x in ("plot.png", "plot.pdf", "plot.csv"))
for path in (png, pdf, series):
    if os.path.exists(path):
        os.remove(path)

# Clopper-pearson (method position 2), upper bound (side 1), 0.95 (level 1), n = 30 then 5.
r = plot(exact, "--method", "clopper-pearson", "--n", "30", "--n", "5", "--side", "upper-bound",
         "--level", "0.95", "-o", png, "--csv", series)
assert r.returncode == 0, r.stderr
assert "from /exact/coverage" in r.stdout and "simulated" not in r.stdout, r.stdout
with Image.open(png) as im:
    assert im.format == "PNG" and im.size == (800, 500), (im.format, im.size)
    im.verify()
cs = check_series(series, exact, "exact/coverage", (0, 1, 1, 2), [2, 0], [30, 5])
# An exact-tail bound never covers less than its level (Clopper & Pearson 1934).
assert np.all(cs >= 0.95 - 1e-12), cs.min()

# Defaults: the first side (two-sided) and level (0.9); PDF by extension.
r = plot(exact, "--method", "wald", "--n", "12", "-o", pdf, "--csv", series)
assert r.returncode == 0, r.stderr
with open(pdf, "rb") as f:
    assert f.read(5) == b"%PDF-"
check_series(series, exact, "exact/coverage", (0, 0, 0, 1), [1], [12])

# A cube with only Monte Carlo results is plotted from /mc/coverage, marked simulated.
mc = make_cube("plot-mc", "exact = false\nreplicates = 400")
r = plot(mc, "--method", "wilson", "--n", "5", "--level", "0.95", "-o", png, "--csv", series)
assert r.returncode == 0, r.stderr
assert "simulated coverage" in r.stdout and "from /mc/coverage" in r.stdout, r.stdout
check_series(series, mc, "mc/coverage", (0, 0, 1, 0), [0], [5])

# A value not on an axis: exit 2, the axis's values listed, the output left as it was.
with open(png, "wb") as f:
    f.write(b"earlier file")
for opt, bad, listed in (("--method", "wilsn", "wilson, wald, clopper-pearson"),
                         ("--n", "13", "5, 12, 30"), ("--level", "0.99", "0.9, 0.95"),
                         ("--side", "lower-bound", "two-sided, upper-bound")):
    args = {"--method": "wald", "--n": "5", opt: bad}
    r = plot(exact, *[x for kv in args.items() for x in kv], "-o", png)
    assert r.returncode == 2, (opt, r.returncode, r.stderr)
    assert f"{opt} {bad} is not in" in r.stderr and listed in r.stderr, r.stderr
    with open(png, "rb") as f:
        assert f.read() == b"earlier file", opt
assert not os.path.exists(png + ".part")
r = plot(os.path.join(work, "plot-exact.toml"), "--method", "wald", "--n", "5", "-o", png)
assert r.returncode == 2 and "cannot open" in r.stderr, r.stderr

print(f"h5py {h5py.__version__}, matplotlib {matplotlib.__version__}, PIL {PIL.__version__}: "
      "plotted series equal the cube; bad values exit 2")
