#!/usr/bin/python3
"""The cube read by a user with only h5py: axes found by name, a method and n
selected by label, and the coverage checked against an independent SciPy
computation (scipy.stats.binom and scipy.stats.beta from Debian's
python3-scipy; versions printed). Usage: check_cube_h5py.py COVERGRID_EXE DIR"""
import os
import subprocess
import sys

import h5py
import numpy as np
import scipy
from scipy import stats

exe, work = sys.argv[1], sys.argv[2]
os.makedirs(work, exist_ok=True)
scenario = os.path.join(work, "h5py-check.toml")
with open(scenario, "w") as f:
    f.write("""title = "h5py check"
[grid]
n = [4, 25, 60]
p = { from = 0.01, to = 0.99, count = 99 }
levels = [0.9, 0.95]
[[method]]
id = "clopper-pearson"
[[method]]
id = "wilson"
[output]
cube = "h5py-check.h5"
tables = ""
""")
cube = os.path.join(work, "h5py-check.h5")
if os.path.exists(cube):
    os.remove(cube)
subprocess.run([exe, "run", scenario, "--quiet"], check=True, stdout=subprocess.DEVNULL)

def text(v):
    return v.decode() if isinstance(v, bytes) else v

with h5py.File(cube, "r") as f:
    assert text(f.attrs["format"]) == "covergrid-cube"
    cov = f["exact/coverage"]
    labels = [cov.dims[i].label for i in range(cov.ndim)]
    assert labels == ["model", "side", "level", "method", "n", "p"], labels
    assert [text(a) for a in cov.attrs["axes"]] == labels
    axis = {d.label: d[0][()] for d in cov.dims}  # each dimension's attached scale
    methods = [text(m) for m in axis["method"]]
    im = methods.index("clopper-pearson")
    il = int(np.where(np.isclose(axis["level"], 0.95))[0][0])
    ni = int(np.where(axis["n"] == 25)[0][0])
    row = cov[0, 0, il, im, ni, :]
    n, p = 25, axis["p"]
    # Independent: Clopper-Pearson limits from scipy.stats.beta, pmf from scipy.stats.binom.
    x = np.arange(n + 1)
    lo = np.where(x == 0, 0.0, stats.beta.ppf(0.025, x, n - x + 1))
    hi = np.where(x == n, 1.0, stats.beta.isf(0.025, x + 1, n - x))
    want = np.array([stats.binom.pmf(x, n, q)[(lo <= q) & (q <= hi)].sum() for q in p])
    err = np.max(np.abs(row - want))
    assert err < 1e-12, err
    assert np.all(row >= 0.95 - 1e-12)
    inf = f["summary/inf_coverage"][0, 0, il, im, ni]
    assert inf <= row.min() + 1e-12
print(f"h5py {h5py.__version__}, scipy {scipy.__version__}: cube axes found by name; "
      f"coverage matches scipy to {err:.1e}")
