"""Writes ncf_scipy.csv: noncentral F cdf, sf and central F inverse from scipy.stats (PyPI),
the outside reference for engine/tests/ncf.rs. Run with the pinned scipy of
tests/requirements.txt: tests/.venv/bin/python tests/data/make_ncf_reference.py
"""
import csv
import pathlib

import numpy as np
import scipy
from scipy import stats

rng = np.random.default_rng(7)
out = pathlib.Path(__file__).with_name("ncf_scipy.csv")
with open(out, "w", newline="") as f:
    f.write(f"# scipy {scipy.__version__}: stats.ncf.cdf, stats.ncf.sf, stats.f.isf(0.05), stats.ncf.ppf(q)\n")
    w = csv.writer(f)
    w.writerow(["x", "d1", "d2", "lambda", "cdf", "sf", "f_isf_05", "q", "ppf"])
    for _ in range(240):
        d1 = float(rng.choice([1, 2, 3, 4, 5, 7, 10, 15]))
        d2 = float(rng.choice([3, 5, 10, 20, 40, 57, 100, 500]))
        lam = float(rng.choice([0.5, 1, 2.5, 5, 10, 20, 40, 80, 150]))
        x = float(rng.uniform(0.05, 3.0) * (1 + lam / d1))
        q = float(rng.uniform(0.02, 0.98))
        w.writerow([repr(x), d1, d2, lam, repr(float(stats.ncf.cdf(x, d1, d2, lam))),
                    repr(float(stats.ncf.sf(x, d1, d2, lam))), repr(float(stats.f.isf(0.05, d1, d2))),
                    repr(q), repr(float(stats.ncf.ppf(q, d1, d2, lam)))])
