"""Factorial ANOVA, Welch's ANOVA and the assumption checks through the kernel, against outside
references (PyPI, pinned in tests/requirements.txt):

* statsmodels OLS + `anova_lm` (typ 2, and typ 3 with Sum contrasts) on seeded unbalanced
  designs with two and three factors;
* partial η² and partial ω² from their formulas (Keppel 1991; Olejnik & Algina 2003), here;
* `scipy.stats.levene` (center "median" and "mean") and `scipy.stats.shapiro`;
* statsmodels `anova_oneway(use_var="unequal")` for Welch's test;
* a worked example, Crampton's guinea-pig data (tests/data/TOOTHGROWTH_SOURCE.md).
"""
import itertools

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.oneway import anova_oneway

from conftest import ROOT, bundle_of, execute


def run(kc, code):
    reply, msgs = execute(kc, code)
    assert reply["content"]["status"] == "ok", reply["content"]
    return bundle_of(msgs)


def row(b, name, table="anova"):
    return next(r for r in b["tables"][table] if r["effect"] == name)


def design(rng, sizes, lo=2, hi=9):
    rows = []
    for cell in itertools.product(*[range(k) for k in sizes]):
        n = int(rng.integers(lo, hi))
        mu = 20 + sum((j + 1) * 0.6 * c for j, c in enumerate(cell)) + 0.8 * np.prod([c + 1 for c in cell]) / len(sizes)
        for _ in range(n):
            r = {f"f{j}": f"L{c}" for j, c in enumerate(cell)}
            r["y"] = float(rng.normal(mu, 1.0 + 0.3 * cell[0]))
            rows.append(r)
    return pd.DataFrame(rows)


@pytest.mark.parametrize("seed,sizes", [(0, (2, 3)), (1, (4, 3)), (2, (3, 2, 2)), (3, (2, 2))])
def test_unbalanced_factorial_matches_anova_lm(kernel, tmp_path, seed, sizes):
    km, kc = kernel
    rng = np.random.default_rng(700 + seed)
    df = design(rng, sizes)
    path = tmp_path / "f.csv"
    df.to_csv(path, index=False, float_format="%.17g")
    names = [f"f{j}" for j in range(len(sizes))]
    for typ in (2, 3):
        b = run(kc, f'read "{path}" as t{seed}\nanova y across {", ".join(names)} in t{seed} with ss {typ}')
        assert b["design"]["ss_type"] == typ
        if typ == 2:
            formula = "y ~ " + " * ".join(f"C({n})" for n in names)
        else:
            formula = "y ~ " + " * ".join(f"C({n}, Sum)" for n in names)
        fit = ols(formula, data=df).fit()
        tab = sm.stats.anova_lm(fit, typ=typ)
        res_ss, res_df = tab.loc["Residual", "sum_sq"], tab.loc["Residual", "df"]
        mse = res_ss / res_df
        n = len(df)
        for r in range(1, len(names) + 1):
            for combo in itertools.combinations(names, r):
                term = ":".join(f"C({c})" if typ == 2 else f"C({c}, Sum)" for c in combo)
                e = row(b, " × ".join(combo))
                ss, d = tab.loc[term, "sum_sq"], tab.loc[term, "df"]
                assert e["ss"] == pytest.approx(ss, rel=1e-9), (typ, combo)
                assert e["df"] == d
                assert e["f"] == pytest.approx(tab.loc[term, "F"], rel=1e-9)
                assert e["p"] == pytest.approx(tab.loc[term, "PR(>F)"], rel=1e-7)
                assert e["eta2_partial"] == pytest.approx(ss / (ss + res_ss), rel=1e-9)
                assert e["omega2_partial"] == pytest.approx((ss - d * mse) / (ss + (n - d) * mse), rel=1e-8)
        res = row(b, "Residual")
        assert res["ss"] == pytest.approx(res_ss, rel=1e-9) and res["df"] == res_df


def test_where_applies_to_factorial_and_check(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(800)
    df = design(rng, (3, 3))
    path = tmp_path / "w.csv"
    df.to_csv(path, index=False, float_format="%.17g")
    sub = df[(df.f0 != "L2") & (df.y > 20)]
    b = run(kc, f'read "{path}" as w\nanova y across f0, f1 in w where f0 != "L2" and y > 20')
    tab = sm.stats.anova_lm(ols("y ~ C(f0) * C(f1)", data=sub).fit(), typ=2)
    assert row(b, "f0 × f1")["ss"] == pytest.approx(tab.loc["C(f0):C(f1)", "sum_sq"], rel=1e-9)
    assert b["provenance"]["rows_used"] == len(sub)
    c = run(kc, f'check y across f0, f1 in w where f0 != "L2" and y > 20')
    groups = [g.y.to_numpy() for _, g in sub.groupby(["f0", "f1"], sort=True)]
    bf = next(r for r in c["tables"]["checks"] if r["check"] == "brown_forsythe")
    assert bf["statistic"] == pytest.approx(stats.levene(*groups, center="median").statistic, rel=1e-9)


@pytest.mark.parametrize("seed", range(6))
def test_spread_and_normality_checks_match_scipy(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(900 + seed)
    k = int(rng.integers(2, 6))
    rows = []
    for i in range(k):
        n = int(rng.integers(2 if seed else 3, 40))
        vals = rng.gamma(2.0, 1.0 + i, size=n) if seed % 2 else rng.normal(10, 1 + i, size=n)
        rows += [{"g": f"G{i}", "y": float(v)} for v in vals]
    df = pd.DataFrame(rows)
    path = tmp_path / "c.csv"
    df.to_csv(path, index=False, float_format="%.17g")
    b = run(kc, f'read "{path}" as c{seed}\ncheck y across g in c{seed}')
    checks = {r["check"]: r for r in b["tables"]["checks"]}
    groups = [df.y[df.g == f"G{i}"].to_numpy() for i in range(k)]
    for name, center in [("brown_forsythe", "median"), ("levene", "mean")]:
        ref = stats.levene(*groups, center=center)
        assert checks[name]["statistic"] == pytest.approx(ref.statistic, rel=1e-9)
        assert checks[name]["p"] == pytest.approx(ref.pvalue, rel=1e-8)
        assert (checks[name]["df"], checks[name]["df_error"]) == (k - 1, len(df) - k)
    resid = np.concatenate([g - g.mean() for g in groups])
    ref = stats.shapiro(resid)
    assert checks["shapiro_wilk"]["statistic"] == pytest.approx(ref.statistic, rel=1e-6)
    assert checks["shapiro_wilk"]["p"] == pytest.approx(ref.pvalue, rel=1e-4, abs=1e-12)


@pytest.mark.parametrize("n", [3, 4, 5, 6, 7, 11, 12, 20, 50, 200, 1000, 5000])
def test_shapiro_wilk_across_sample_sizes_matches_scipy(kernel, tmp_path, n):
    km, kc = kernel
    rng = np.random.default_rng(n)
    x = rng.lognormal(0, 0.5, size=n) if n % 2 else rng.normal(0, 1, size=n)
    # Two groups (the last value alone when n = 3); residuals are x minus each group's mean.
    g = np.array([0, 0, 1]) if n == 3 else np.arange(n) % 2
    y = x + 5 * g
    path = tmp_path / "s.csv"
    pd.DataFrame({"g": [f"G{v}" for v in g], "y": y}).to_csv(path, index=False, float_format="%.17g")
    resid = np.concatenate([y[g == v] - y[g == v].mean() for v in (0, 1)])
    b = run(kc, f'read "{path}" as s{n}\ncheck y across g in s{n}')
    sw = next(r for r in b["tables"]["checks"] if r["check"] == "shapiro_wilk")
    ref = stats.shapiro(resid)
    assert sw["statistic"] == pytest.approx(ref.statistic, rel=1e-6), n
    assert sw["p"] == pytest.approx(ref.pvalue, rel=1e-4, abs=1e-10), n


@pytest.mark.parametrize("seed", range(5))
def test_welch_matches_statsmodels_anova_oneway(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(1000 + seed)
    k = int(rng.integers(2, 7))
    groups = [rng.normal(10 + i * 0.3, 0.5 + i, size=int(rng.integers(2, 25))) for i in range(k)]
    path = tmp_path / "wl.csv"
    with open(path, "w") as f:
        f.write("g,y\n")
        for i, gv in enumerate(groups):
            for v in gv:
                f.write(f"G{i},{float(v)!r}\n")
    b = run(kc, f'read "{path}" as wl{seed}\nanova y across g in wl{seed} with welch')
    w = b["tables"]["welch"][0]
    ref = anova_oneway(groups, use_var="unequal")
    assert w["f"] == pytest.approx(ref.statistic, rel=1e-9)
    assert w["df"] == pytest.approx(ref.df[0]) and w["df_error"] == pytest.approx(ref.df[1], rel=1e-9)
    assert w["p"] == pytest.approx(ref.pvalue, rel=1e-7)


def test_toothgrowth_worked_example(kernel):
    """Balanced 2 × 3 (tests/data/TOOTHGROWTH_SOURCE.md; expected values recalled from
    printed worked examples, and confirmed here against statsmodels and scipy)."""
    km, kc = kernel
    path = ROOT / "tests" / "data" / "toothgrowth.csv"
    b = run(kc, f'read "{path}" as tooth with factor dose\nanova length across supplement, dose in tooth')
    assert row(b, "supplement")["f"] == pytest.approx(15.572, abs=5e-4)
    assert row(b, "supplement")["p"] == pytest.approx(0.000231, abs=5e-7)
    assert row(b, "dose")["f"] == pytest.approx(92.000, abs=5e-4)
    assert row(b, "supplement × dose")["f"] == pytest.approx(4.107, abs=5e-4)
    assert row(b, "supplement × dose")["p"] == pytest.approx(0.0219, abs=5e-5)
    assert row(b, "Residual")["ss"] == pytest.approx(712.1, abs=0.05)
    d = pd.read_csv(path)
    tab = sm.stats.anova_lm(ols("length ~ C(supplement) * C(dose)", data=d).fit(), typ=2)
    assert row(b, "dose")["ss"] == pytest.approx(tab.loc["C(dose)", "sum_sq"], rel=1e-10)
    c = run(kc, "check length across supplement, dose in tooth")
    checks = {r["check"]: r for r in c["tables"]["checks"]}
    assert checks["shapiro_wilk"]["statistic"] == pytest.approx(0.98499, abs=5e-6)
    assert checks["shapiro_wilk"]["p"] == pytest.approx(0.6694, abs=5e-5)
    assert checks["brown_forsythe"]["statistic"] == pytest.approx(1.7086, abs=5e-5)
    assert checks["brown_forsythe"]["p"] == pytest.approx(0.1484, abs=5e-5)
