"""Repeated-measures and mixed ANOVA through the kernel, against outside references:

* statsmodels (PyPI, pinned in tests/requirements.txt) `AnovaRM` for F, df and p on balanced
  one-within and two-within designs;
* Mauchly's W and its χ², the Greenhouse–Geisser ε and the Huynh–Feldt ε with Lecoutre's
  correction, written here with numpy from the published formulas (Mauchly 1940; Greenhouse &
  Geisser 1959; Huynh & Feldt 1976; Lecoutre 1991), on seeded non-spherical designs, using a
  different orthonormal contrast basis from the engine's (QR of successive differences);
* a mixed design with unequal groups against statsmodels OLS: sums of squares as differences of
  residual sums of squares of nested models with subject nested in group (type 2), and against
  statsmodels `anova_lm(typ=3)` with Sum contrasts on each contrast score (type 3);
* a published worked example (Fisher's iris data, tests/data/IRIS_SOURCE.md).
"""
import itertools

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.anova import AnovaRM, anova_lm
import pandas as pd

from conftest import ROOT, bundle_of, execute

REL = 1e-9


def write_long(path, y, groups, wnames, wlevels, bname="grp"):
    """y: N × C (C = product of within levels, first factor slowest)."""
    rows = []
    for s in range(y.shape[0]):
        for c, combo in enumerate(itertools.product(*[range(k) for k in wlevels])):
            rows.append({"id": f"s{s:03d}", bname: f"g{groups[s]}", **{w: f"{w}{l + 1}" for w, l in zip(wnames, combo)}, "y": float(y[s, c])})
    df = pd.DataFrame(rows)
    df.to_csv(path, index=False, float_format="%.17g")
    return df


def run_anova(kc, path, name, factors, extra=""):
    reply, msgs = execute(kc, f'read "{path}" as {name}\nanova y across {factors} in {name} subject id {extra}')
    assert reply["content"]["status"] == "ok", reply["content"]
    return bundle_of(msgs)


def effect(b, name):
    return next(r for r in b["tables"]["anova"] if r["effect"] == name)


def nonspherical(rng, n, k, groups=1):
    """Subjects with an AR(1)-like covariance whose variance grows across levels."""
    idx = np.arange(k)
    cov = 0.8 ** np.abs(idx[:, None] - idx[None, :]) * np.outer(1 + idx, 1 + idx) * 0.5
    y = rng.multivariate_normal(np.linspace(0, 1.5, k), cov, size=n) + rng.normal(0, 1, (n, 1)) + 20
    g = np.arange(n) % groups
    y += 0.7 * g[:, None] * idx[None, :] / k
    return y, g


def contrasts(k):
    """Orthonormal contrasts from successive differences (an independent basis)."""
    d = np.zeros((k, k - 1))
    for j in range(k - 1):
        d[j, j], d[j + 1, j] = 1, -1
    q, _ = np.linalg.qr(d)
    return q


def ref_sphericity(z, g):
    """Published formulas on the contrast scores z (N × d), pooled within groups g."""
    n, d = z.shape
    groups = np.unique(g)
    r = sum((z[g == h] - z[g == h].mean(0)).T @ (z[g == h] - z[g == h].mean(0)) for h in groups)
    nu = n - len(groups)
    s = r / nu
    w = np.linalg.det(s) / (np.trace(s) / d) ** d  # Mauchly (1940)
    chi2 = -(nu - (2 * d * d + d + 2) / (6 * d)) * np.log(w)
    df = d * (d + 1) / 2 - 1
    gg = np.trace(s) ** 2 / (d * np.trace(s @ s))  # Greenhouse & Geisser (1959)
    hf = min(1.0, ((nu + 1) * d * gg - 2) / (d * (nu - d * gg)))  # Huynh & Feldt (1976), Lecoutre (1991)
    return w, chi2, df, stats.chi2.sf(chi2, df), gg, hf


@pytest.mark.parametrize("seed", range(4))
def test_one_within_matches_statsmodels_anovarm(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(100 + seed)
    n, k = int(rng.integers(6, 20)), int(rng.integers(3, 6))
    y, g = nonspherical(rng, n, k)
    df = write_long(tmp_path / "a.csv", y, g, ["time"], [k])
    b = run_anova(kc, tmp_path / "a.csv", f"a{seed}", "time")
    ref = AnovaRM(df, "y", "id", within=["time"]).fit().anova_table
    e = effect(b, "time")
    assert e["f"] == pytest.approx(ref.loc["time", "F Value"], rel=REL)
    assert e["df"] == ref.loc["time", "Num DF"]
    assert e["df_error"] == ref.loc["time", "Den DF"]
    assert e["p"] == pytest.approx(ref.loc["time", "Pr > F"], rel=1e-8)


@pytest.mark.parametrize("seed", range(3))
def test_two_within_matches_statsmodels_anovarm(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(200 + seed)
    n = int(rng.integers(6, 15))
    y, g = nonspherical(rng, n, 12)
    df = write_long(tmp_path / "b.csv", y, g, ["light", "day"], [3, 4])
    b = run_anova(kc, tmp_path / "b.csv", f"b{seed}", "light, day")
    ref = AnovaRM(df, "y", "id", within=["light", "day"]).fit().anova_table
    for ours, theirs in [("light", "light"), ("day", "day"), ("light × day", "light:day")]:
        e = effect(b, ours)
        assert e["f"] == pytest.approx(ref.loc[theirs, "F Value"], rel=REL), ours
        assert (e["df"], e["df_error"]) == (ref.loc[theirs, "Num DF"], ref.loc[theirs, "Den DF"])
        assert e["p"] == pytest.approx(ref.loc[theirs, "Pr > F"], rel=1e-8), ours


@pytest.mark.parametrize("seed", range(4))
def test_sphericity_matches_the_published_formulas(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(300 + seed)
    groups = [1, 2, 3, 2][seed]
    n, k = int(rng.integers(12, 30)), [4, 5, 6, 4][seed]
    y, g = nonspherical(rng, n, k, groups)
    if groups > 1:
        write_long(tmp_path / "c.csv", y, g, ["time"], [k])
        b = run_anova(kc, tmp_path / "c.csv", f"c{seed}", "grp, time")
    else:
        write_long(tmp_path / "c.csv", y, g, ["time"], [k])
        b = run_anova(kc, tmp_path / "c.csv", f"c{seed}", "time")
    w, chi2, df, p, gg, hf = ref_sphericity(y @ contrasts(k), g)
    sph = b["tables"]["sphericity"][0]
    assert sph["w"] == pytest.approx(w, rel=1e-9)
    assert sph["chi2"] == pytest.approx(chi2, rel=1e-9)
    assert sph["df"] == df
    assert sph["p"] == pytest.approx(p, rel=1e-7)
    assert sph["gg_epsilon"] == pytest.approx(gg, rel=1e-10)
    assert sph["hf_epsilon"] == pytest.approx(hf, rel=1e-10)
    assert sph["lower_bound"] == pytest.approx(1 / (k - 1))
    e = effect(b, "time")
    assert e["gg_p"] == pytest.approx(stats.f.sf(e["f"], gg * e["df"], gg * e["df_error"]), rel=1e-8)
    assert e["hf_p"] == pytest.approx(stats.f.sf(e["f"], hf * e["df"], hf * e["df_error"]), rel=1e-8)
    # The stated rule: Greenhouse–Geisser below .75, else Huynh–Feldt (common practice).
    assert e["correction"] == ("greenhouse-geisser" if gg < 0.75 else "huynh-feldt")


def test_interaction_sphericity_of_two_within_factors(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(400)
    y, g = nonspherical(rng, 25, 12)
    write_long(tmp_path / "d.csv", y, g, ["light", "day"], [3, 4])
    b = run_anova(kc, tmp_path / "d.csv", "d", "light, day")
    # The interaction contrasts: the Kronecker product of each factor's contrasts.
    z = y @ np.kron(contrasts(3), contrasts(4))
    w, chi2, df, p, gg, hf = ref_sphericity(z, g)
    sph = next(s for s in b["tables"]["sphericity"] if s["effect"] == "light × day")
    assert sph["w"] == pytest.approx(w, rel=1e-8)
    assert sph["gg_epsilon"] == pytest.approx(gg, rel=1e-10)
    assert sph["hf_epsilon"] == pytest.approx(hf, rel=1e-10)
    assert df == 20 and sph["df"] == 20


def rss(y, *blocks):
    x = np.column_stack(blocks)
    return sm.OLS(y, x).fit().ssr


def dummies(labels):
    return pd.get_dummies(pd.Series(labels)).to_numpy(dtype=float)


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")  # subject nested in group
@pytest.mark.parametrize("seed", range(3))
def test_mixed_unequal_groups_matches_ols_decomposition(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(500 + seed)
    sizes = [[4, 7, 5], [9, 3], [5, 6, 8, 4]][seed]
    k = [4, 3, 5][seed]
    y = np.vstack([nonspherical(rng, n, k)[0] + 0.4 * i for i, n in enumerate(sizes)])
    g = np.repeat(np.arange(len(sizes)), sizes)
    df = write_long(tmp_path / "e.csv", y, g, ["time"], [k])
    b = run_anova(kc, tmp_path / "e.csv", f"e{seed}", "grp, time")
    yy = df["y"].to_numpy()
    one = np.ones((len(yy), 1))
    G, S, T = dummies(df["grp"]), dummies(df["id"]), dummies(df["time"])
    GT = dummies(df["grp"] + ":" + df["time"])
    r0, r1 = rss(yy, one), rss(yy, one, G)
    r2, r3, r4 = rss(yy, one, G, S), rss(yy, one, G, S, T), rss(yy, one, G, S, T, GT)
    n, ng = len(g), len(sizes)
    checks = {
        "grp": (r0 - r1, ng - 1, r1 - r2, n - ng),
        "time": (r2 - r3, k - 1, r4, (k - 1) * (n - ng)),
        "grp × time": (r3 - r4, (ng - 1) * (k - 1), r4, (k - 1) * (n - ng)),
    }
    for name, (ss, dfe, sse, dfee) in checks.items():
        e = effect(b, name)
        assert e["ss"] == pytest.approx(ss, rel=1e-8), name
        assert e["df"] == dfe and e["df_error"] == dfee, name
        assert e["ss_error"] == pytest.approx(sse, rel=1e-8), name
        assert e["f"] == pytest.approx((ss / dfe) / (sse / dfee), rel=1e-8), name
    # Generalized η² with every error stratum in the denominator (Olejnik & Algina 2003).
    err = (r1 - r2) + r4
    for name, (ss, *_rest) in checks.items():
        assert effect(b, name)["eta2_generalized"] == pytest.approx(ss / (ss + err), rel=1e-8)


def test_type3_in_two_unbalanced_between_factors_matches_anova_lm_sum_contrasts(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(600)
    # 2 × 3 between cells with unequal counts, 4 within levels.
    counts = [3, 5, 4, 6, 2, 4]
    cells = list(itertools.product(range(2), range(3)))
    y = np.vstack([nonspherical(rng, c, 4)[0] + 0.5 * a + 0.3 * bb for c, (a, bb) in zip(counts, cells)])
    ab = np.repeat(np.arange(6), counts)
    rows = []
    for s in range(len(ab)):
        a, bb = cells[ab[s]]
        for t in range(4):
            rows.append({"id": f"s{s:02d}", "a": f"a{a + 1}", "b": f"b{bb + 1}", "time": f"t{t + 1}", "y": float(y[s, t])})
    pd.DataFrame(rows).to_csv(tmp_path / "f.csv", index=False, float_format="%.17g")
    subj = pd.DataFrame({"a": [f"a{cells[i][0] + 1}" for i in ab], "b": [f"b{cells[i][1] + 1}" for i in ab]})
    seen = {}
    for ss_type in (2, 3):
        b = run_anova(kc, tmp_path / "f.csv", f"f{ss_type}", "a, b, time", f"with ss {ss_type}")
        # Between stratum: subject totals / √C; within stratum: each contrast score, summed.
        strata = {"": y.sum(1, keepdims=True) / 2.0, " × time": y @ contrasts(4)}
        for suffix, z in strata.items():
            total = {}
            for j in range(z.shape[1]):
                d = subj.assign(z=z[:, j])
                fit = ols("z ~ C(a, Sum) * C(b, Sum)", data=d).fit()
                tab = anova_lm(fit, typ=ss_type)
                for term, ours in [("C(a, Sum)", "a"), ("C(b, Sum)", "b"), ("C(a, Sum):C(b, Sum)", "a × b")]:
                    total[ours] = total.get(ours, 0.0) + tab.loc[term, "sum_sq"]
                if ss_type == 3:
                    total["intercept"] = total.get("intercept", 0.0) + tab.loc["Intercept", "sum_sq"]
            for name, ss in total.items():
                if name == "intercept":
                    if suffix:
                        assert effect(b, "time")["ss"] == pytest.approx(ss, rel=1e-8)
                    continue
                assert effect(b, name + suffix)["ss"] == pytest.approx(ss, rel=1e-8), (ss_type, name + suffix)
        assert b["design"]["ss_type"] == ss_type
        seen[ss_type] = effect(b, "a")["ss"]
    # The design is unbalanced enough for the two types to differ.
    assert abs(seen[2] - seen[3]) > 1e-3 * seen[3]


def test_published_iris_example(kernel):
    """Fisher's iris data, four measurements as repeated measures, species between
    (tests/data/IRIS_SOURCE.md). The printed values have five significant digits."""
    km, kc = kernel
    path = ROOT / "tests" / "data" / "iris.csv"
    code = (
        f'read "{path}" as iris\n'
        "unpivot iris columns sepal_length, sepal_width, petal_length, petal_width into part, cm as parts\n"
        "anova cm across species, part subject flower"
    )
    reply, msgs = execute(kc, code)
    assert reply["content"]["status"] == "ok", reply["content"]
    b = bundle_of(msgs)
    sph = b["tables"]["sphericity"][0]
    assert sph["w"] == pytest.approx(0.55814, abs=5e-6)
    assert sph["chi2"] == pytest.approx(84.976, abs=5e-4)
    assert sph["df"] == 5
    assert sph["p"] == pytest.approx(7.6149e-17, rel=1e-4)
    e = effect(b, "part")
    assert e["ss"] == pytest.approx(1656.3, abs=0.05)
    assert e["df"] == 3
    assert e["f"] == pytest.approx(6873.3, abs=0.05)
    # The printed p values were computed from the unrounded F; ours agree to the 5 digits shown
    # within the effect of F's own rounding, so compare on a log scale.
    assert np.log10(e["gg_p"]) == pytest.approx(np.log10(9.4491e-279), abs=2e-3)
    assert np.log10(e["hf_p"]) == pytest.approx(np.log10(2.9213e-283), abs=2e-3)
    assert np.log10(e["lb_p"]) == pytest.approx(np.log10(2.5871e-125), abs=2e-3)
