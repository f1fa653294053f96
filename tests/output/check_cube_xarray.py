#!/usr/bin/python3
"""The cube read as netCDF-4 by xarray (Debian 12's python3-xarray 2023.01.0,
which reports __version__ 999, with python3-h5netcdf 1.1.0 and
python3-netcdf4 1.6.2; versions printed): /exact, /mc and
/summary open with engine="h5netcdf" and with engine="netcdf4" as labelled
arrays, coverage selected by method label, n and level equals h5py's values
bit for bit, the replicate counts are integers, every variable has long_name
(and units but for the string labels), and the p axis holds the decimals of
the scenario (0.01 + i * 0.005, so p == 0.05 is found).
Usage: check_cube_xarray.py COVERGRID_EXE DIR"""
import os
import subprocess
import sys

import h5netcdf
import h5py
import netCDF4
import numpy as np
import xarray

exe, work = sys.argv[1], sys.argv[2]
os.makedirs(work, exist_ok=True)
scenario = os.path.join(work, "xarray-check.toml")
with open(scenario, "w") as f:
    f.write("""title = "xarray check"
seed = 31
[grid]
n = [5, 20, 40]
p = { from = 0.01, to = 0.99, count = 197 }
levels = [0.9, 0.95]
sides = ["two-sided", "lower-bound"]
[evaluate]
replicates = 200
[[method]]
id = "wald"
[[method]]
id = "wilson"
[output]
cube = "xarray-check.h5"
tables = ""
""")
cube = os.path.join(work, "xarray-check.h5")
if os.path.exists(cube):
    os.remove(cube)
subprocess.run([exe, "run", scenario, "--quiet"], check=True, stdout=subprocess.DEVNULL)

dims6 = ("model", "side", "level", "method", "n", "p")
labels = {"model", "side", "method"}  # strings: no units


def text(v):
    return v.decode() if isinstance(v, bytes) else v


with h5py.File(cube, "r") as f:
    h5 = {
        "exact": f["exact/coverage"][0, 0, 1, 1, 1, :],  # two-sided, 0.95, wilson, n = 20
        "mc": f["mc/coverage"][0, 0, 1, 1, 1, :],
        "summary": f["summary/inf_coverage"][0, 0, 1, 1, 1],
        "replicates": f["mc/replicates"][0, 1, :],
    }
    assert [text(m) for m in f["exact/method"][()]] == ["wald", "wilson"]
    assert list(f["exact/n"][()]) == [5, 20, 40]
    # The p axis: the decimals the scenario states, not their binary neighbours.
    p = f["summary/p"][()]
    assert len(p) == 197
    assert all(p[i] == float(f"{0.01 + i * 0.005:.15g}") for i in range(197)), p
    assert np.count_nonzero(p == 0.05) == 1
    # h5py's own labelled view (README): the scales attached to each dimension.
    assert [d.label for d in f["exact/coverage"].dims] == list(dims6)
    assert f["mc/replicates"].dtype == np.int64

checked = 0
for engine in ("h5netcdf", "netcdf4"):
    for group in ("exact", "mc", "summary"):
        with xarray.open_dataset(cube, group=group, engine=engine) as ds:
            for name, var in ds.variables.items():
                assert "long_name" in var.attrs, (engine, group, name)
                assert ("units" in var.attrs) == (name not in labels), (engine, group, name)
            # xarray's .sel reserves the keyword method= (nearest/pad), so a
            # dimension named "method" is selected with a dict.
            if group == "summary":
                got = ds.inf_coverage.sel({"method": "wilson", "n": 20, "level": 0.95,
                                           "side": "two-sided", "model": "binomial"}).values
                assert ds.inf_coverage.dims == dims6[:5], ds.inf_coverage.dims
                assert got == h5["summary"], (engine, got)
            else:
                cov = ds.coverage.sel({"method": "wilson", "n": 20, "level": 0.95})
                assert ds.coverage.dims == dims6, ds.coverage.dims
                got = cov.sel(side="two-sided", model="binomial").values
                assert np.array_equal(got, h5[group]), (engine, group)
                assert ds.coverage.attrs["units"] == "1"
                assert float(ds.coverage.sel({"method": "wilson", "n": 20, "level": 0.95, "p": 0.05,
                                              "side": "two-sided", "model": "binomial"})) == \
                    h5[group][8]
            if group == "mc":
                reps = ds.replicates
                assert reps.dims == ("model", "n", "p"), reps.dims
                assert reps.dtype == np.int64, (engine, reps.dtype)
                assert reps.attrs["units"] == "count"
                assert np.array_equal(reps.sel(n=20, model="binomial").values, h5["replicates"])
            checked += 1
assert checked == 6
print(f"xarray {xarray.__version__}, h5netcdf {h5netcdf.__version__}, netCDF4 {netCDF4.__version__} "
      f"(netCDF-C {netCDF4.__netcdf4libversion__}), h5py {h5py.__version__}: /exact, /mc and /summary "
      f"open with both engines; selections equal h5py's; p holds the scenario's decimals")
