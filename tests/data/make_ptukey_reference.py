"""Writes ptukey_scipy.csv: the studentized range distribution from scipy.stats (PyPI), the
outside reference for engine/tests/ptukey.rs. Run with the pinned scipy of
tests/requirements.txt: tests/.venv/bin/python tests/data/make_ptukey_reference.py
"""
import csv
import pathlib

import numpy as np
import scipy
from scipy import stats

rng = np.random.default_rng(11)
out = pathlib.Path(__file__).with_name("ptukey_scipy.csv")
with open(out, "w", newline="") as f:
    f.write(f"# scipy {scipy.__version__}: stats.studentized_range.cdf, .sf, .ppf(p)\n")
    w = csv.writer(f)
    w.writerow(["q", "k", "df", "cdf", "sf", "p", "ppf"])
    for _ in range(240):
        k = float(rng.choice([2, 3, 4, 5, 6, 8, 10, 15, 20]))
        df = float(rng.choice([2, 3, 5, 8, 10, 20, 30, 60, 120, 500]))
        q = float(rng.uniform(0.3, 8.0))
        p = float(rng.choice([0.5, 0.9, 0.95, 0.99]))
        w.writerow([repr(q), k, df, repr(float(stats.studentized_range.cdf(q, k, df))),
                    repr(float(stats.studentized_range.sf(q, k, df))), p,
                    repr(float(stats.studentized_range.ppf(p, k, df)))])
