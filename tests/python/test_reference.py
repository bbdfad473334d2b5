"""One-way ANOVA and per-cell summaries through the kernel, against scipy (PyPI, version
pinned in tests/requirements.txt): scipy.stats.f_oneway, scipy.stats.f.sf, scipy.stats.t.ppf; η² and
ω² against their published formulas computed here with numpy."""
import numpy as np
import pytest
from scipy import stats

from conftest import bundle_of, execute

REL = 1e-9  # relative agreement required for F, p and the CI bounds


def rows(bundle, table):
    return bundle["tables"][table]


@pytest.mark.parametrize("seed", range(8))
def test_oneway_matches_scipy_f_oneway_on_seeded_random_designs(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(seed)
    k = int(rng.integers(2, 7))
    groups = [rng.normal(rng.normal(50, 3), rng.uniform(0.5, 4), size=int(rng.integers(2, 15))) for _ in range(k)]
    path = tmp_path / f"r{seed}.csv"
    with open(path, "w") as f:
        f.write("grp,y\n")
        for i, g in enumerate(groups):
            for v in g:
                f.write(f"L{i},{float(v)!r}\n")
    reply, msgs = execute(kc, f'read "{path}" as r{seed}\nanova y across grp in r{seed}')
    assert reply["content"]["status"] == "ok", reply["content"]
    b = bundle_of(msgs)
    eff = rows(b, "anova")[0]
    ref = stats.f_oneway(*groups)
    assert eff["f"] == pytest.approx(ref.statistic, rel=REL)
    assert eff["p"] == pytest.approx(ref.pvalue, rel=1e-8)
    assert eff["df"] == k - 1
    assert rows(b, "anova")[1]["df"] == sum(len(g) for g in groups) - k
    # η² = SS_between / SS_total and ω² = (SS_between − (k − 1)·MS_within) / (SS_total + MS_within)
    # (Hays 1963), computed here independently with numpy.
    allv = np.concatenate(groups)
    ssb = sum(len(g) * (g.mean() - allv.mean()) ** 2 for g in groups)
    sst = ((allv - allv.mean()) ** 2).sum()
    msw = (sst - ssb) / (len(allv) - k)
    assert eff["eta2"] == pytest.approx(ssb / sst, rel=1e-9)
    assert eff["omega2"] == pytest.approx((ssb - (k - 1) * msw) / (sst + msw), rel=1e-8, abs=1e-12)
    for cell, g in zip(rows(b, "cells"), groups):
        n = len(g)
        half = stats.t.ppf(0.975, n - 1) * np.std(g, ddof=1) / np.sqrt(n)
        assert cell["n"] == n
        assert cell["mean"] == pytest.approx(np.mean(g), rel=1e-12)
        assert cell["sd"] == pytest.approx(np.std(g, ddof=1), rel=1e-10)
        assert cell["ci_low"] == pytest.approx(np.mean(g) - half, rel=REL)
        assert cell["ci_high"] == pytest.approx(np.mean(g) + half, rel=REL)


def test_tiny_p_keeps_relative_accuracy(kernel, tmp_path):
    km, kc = kernel
    path = tmp_path / "sep.csv"
    a = [10.0, 10.1, 9.9, 10.05, 9.95, 10.02]
    b = [20.0, 20.1, 19.9, 20.05, 19.95, 20.02]
    path.write_text("g,y\n" + "".join(f"a,{v}\n" for v in a) + "".join(f"b,{v}\n" for v in b))
    reply, msgs = execute(kc, f'read "{path}" as sep\nanova y across g in sep')
    eff = rows(bundle_of(msgs), "anova")[0]
    ref = stats.f_oneway(a, b)
    ref_p = stats.f.sf(ref.statistic, 1, 10)
    assert ref_p < 1e-16  # far below what 1 - cdf can represent
    assert eff["p"] == pytest.approx(ref_p, rel=1e-8)


def test_describe_other_level_matches_scipy_t(kernel, tmp_path):
    km, kc = kernel
    path = tmp_path / "lv.csv"
    g = [3.1, 2.7, 3.8, 3.3, 2.9]
    path.write_text("g,y\n" + "".join(f"a,{v}\n" for v in g))
    reply, msgs = execute(kc, f'read "{path}" as lv\ndescribe y across g in lv with level 0.9')
    cell = rows(bundle_of(msgs), "cells")[0]
    half = stats.t.ppf(0.95, 4) * np.std(g, ddof=1) / np.sqrt(5)
    assert cell["ci_low"] == pytest.approx(np.mean(g) - half, rel=REL)
