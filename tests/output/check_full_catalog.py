#!/usr/bin/python3
"""Checks the acceptance cube (scripts/acceptance) against the contract and
proven properties, reading it with h5py only:
- complete, axes of the stated sizes, every dataset of the stated shape;
- no NaN where every method defines the side (all two-sided here);
- every metric in [0, 1] (width too, as a probability-weighted length);
- coverage + miss_low + miss_high = 1 (the outcomes partition the space);
- Clopper-Pearson and Blaker coverage >= nominal at every grid point
  (proven: Clopper & Pearson 1934; Blaker 2000, Theorem 1);
- the continuous infimum <= the grid minimum for every row."""
import sys

import h5py
import numpy as np

with h5py.File(sys.argv[1], "r") as f:
    assert int(f.attrs["complete"]) == 1
    sizes = {d: f["exact/" + d].shape[0] for d in ["model", "side", "level", "method", "n", "p"]}
    assert sizes == {"model": 1, "side": 1, "level": 3, "method": 16, "n": 300, "p": 2000}, sizes
    methods = [m.decode() if isinstance(m, bytes) else m for m in f["exact/method"][:]]
    levels = f["exact/level"][:]
    shape = tuple(sizes.values())
    metrics = {}
    for name in ["coverage", "miss_low", "miss_high", "width", "width_sd", "degenerate", "overshoot"]:
        d = f["exact/" + name]
        assert d.shape == shape, (name, d.shape)
        a = d[...]
        assert not np.isnan(a).any(), name
        assert (a >= -1e-12).all() and (a <= 1 + 1e-12).all(), name
        metrics[name] = a
    total = metrics["coverage"] + metrics["miss_low"] + metrics["miss_high"]
    assert np.abs(total - 1).max() < 1e-12, np.abs(total - 1).max()
    for m in ["clopper-pearson", "blaker"]:
        i = methods.index(m)
        for l, level in enumerate(levels):
            worst = metrics["coverage"][0, 0, l, i].min()
            assert worst >= level - 1e-12, (m, level, worst)
    inf = f["summary/inf_coverage"][...]
    grid_min = metrics["coverage"].min(axis=-1)
    assert (inf <= grid_min + 1e-12).all()
    assert np.allclose(f["summary/min_coverage"][...], grid_min, rtol=0, atol=0)
print("acceptance: cube checked (shapes, ranges, partition, exact-method guarantees, infimum <= grid minimum)")
