"""Multiple comparisons through the kernel, against outside references (PyPI, pinned in
tests/requirements.txt): scipy.stats.tukey_hsd (Tukey–Kramer p values and intervals);
scipy.stats.dunnett; statsmodels multipletests (holm, bonferroni, fdr_bh); Games–Howell from its
published formula (Games & Howell 1976) computed here with scipy.stats.studentized_range;
paired comparisons against scipy.stats.ttest_rel. The studentized range itself is checked
against scipy at 240 points and a published table in engine/tests/ptukey.rs."""
import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests

from conftest import bundle_of, execute


def run(kc, code):
    reply, msgs = execute(kc, code, timeout=60)
    assert reply["content"]["status"] == "ok", reply["content"]
    return bundle_of(msgs)


def write(path, groups, names=None):
    names = names or [f"G{i}" for i in range(len(groups))]
    with open(path, "w") as f:
        f.write("g,y\n")
        for n, g in zip(names, groups):
            for v in g:
                f.write(f"{n},{float(v)!r}\n")


def seeded_groups(seed, k=None, spread=False):
    rng = np.random.default_rng(seed)
    k = k or int(rng.integers(3, 7))
    return [rng.normal(10 + 0.5 * i * rng.uniform(0, 1.5), 1.0 + (i if spread else 0) * 0.6,
                       size=int(rng.integers(3, 16))) for i in range(k)]


@pytest.mark.parametrize("seed", range(5))
def test_tukey_matches_scipy_tukey_hsd(kernel, tmp_path, seed):
    km, kc = kernel
    groups = seeded_groups(1200 + seed)
    write(tmp_path / "t.csv", groups)
    b = run(kc, f'read "{tmp_path / "t.csv"}" as t{seed}\ncompare y across g in t{seed}')
    ref = stats.tukey_hsd(*groups)
    ci = ref.confidence_interval(0.95)
    for r in b["tables"]["pairs"]:
        i, j = int(r["a"][1:]), int(r["b"][1:])
        assert r["diff"] == pytest.approx(ref.statistic[i, j], rel=1e-12)
        assert r["p_adj"] == pytest.approx(ref.pvalue[i, j], rel=1e-5, abs=1e-9)
        assert r["ci_low"] == pytest.approx(ci.low[i, j], rel=1e-6)
        assert r["ci_high"] == pytest.approx(ci.high[i, j], rel=1e-6)
        assert r["method"] == "tukey"


@pytest.mark.parametrize("seed", range(3))
def test_dunnett_matches_scipy_dunnett(kernel, tmp_path, seed):
    km, kc = kernel
    groups = seeded_groups(1300 + seed)
    write(tmp_path / "d.csv", groups)
    b = run(kc, f'read "{tmp_path / "d.csv"}" as d{seed}\ncompare y across g in d{seed} with method dunnett, control "G0"')
    # scipy integrates the multivariate t by randomised quasi-Monte Carlo (Genz); its own
    # error is about 1e-4, so agreement is asked to 1e-3.
    ref = stats.dunnett(*groups[1:], control=groups[0], rng=np.random.default_rng(0))
    ci = ref.confidence_interval(0.95)
    for r in b["tables"]["pairs"]:
        i = int(r["a"][1:]) - 1
        assert r["b"] == "G0"
        assert r["statistic"] == pytest.approx(ref.statistic[i], rel=1e-10)
        assert r["p_adj"] == pytest.approx(ref.pvalue[i], abs=1e-3)
        assert r["ci_low"] == pytest.approx(ci.low[i], rel=1e-3, abs=1e-3)
        assert r["ci_high"] == pytest.approx(ci.high[i], rel=1e-3, abs=1e-3)


@pytest.mark.parametrize("method,sm", [("holm", "holm"), ("bonferroni", "bonferroni"), ("fdr", "fdr_bh")])
def test_pairwise_t_adjustments_match_multipletests(kernel, tmp_path, method, sm):
    km, kc = kernel
    groups = seeded_groups(1400, k=5)
    write(tmp_path / "m.csv", groups)
    b = run(kc, f'read "{tmp_path / "m.csv"}" as m\ncompare y across g in m with method {method}')
    allv = np.concatenate(groups)
    dfe = len(allv) - len(groups)
    mse = sum(((g - g.mean()) ** 2).sum() for g in groups) / dfe
    raw = []
    for r in b["tables"]["pairs"]:
        gi, gj = groups[int(r["a"][1:])], groups[int(r["b"][1:])]
        t = (gi.mean() - gj.mean()) / np.sqrt(mse * (1 / len(gi) + 1 / len(gj)))
        p = 2 * stats.t.sf(abs(t), dfe)
        assert r["p"] == pytest.approx(p, rel=1e-9)
        raw.append(p)
    adj = multipletests(raw, method=sm)[1]
    for r, a in zip(b["tables"]["pairs"], adj):
        assert r["p_adj"] == pytest.approx(a, rel=1e-9)


@pytest.mark.parametrize("seed", range(3))
def test_games_howell_matches_its_published_formula(kernel, tmp_path, seed):
    km, kc = kernel
    groups = seeded_groups(1500 + seed, spread=True)
    write(tmp_path / "gh.csv", groups)
    b = run(kc, f'read "{tmp_path / "gh.csv"}" as gh{seed}\ncompare y across g in gh{seed} with method games-howell')
    k = len(groups)
    for r in b["tables"]["pairs"]:
        gi, gj = groups[int(r["a"][1:])], groups[int(r["b"][1:])]
        vi, vj = gi.var(ddof=1) / len(gi), gj.var(ddof=1) / len(gj)
        se = np.sqrt(vi + vj)
        df = (vi + vj) ** 2 / (vi ** 2 / (len(gi) - 1) + vj ** 2 / (len(gj) - 1))
        q = abs(gi.mean() - gj.mean()) / se * np.sqrt(2)
        assert r["se"] == pytest.approx(se, rel=1e-10)
        assert r["df"] == pytest.approx(df, rel=1e-10)
        assert r["statistic"] == pytest.approx(q, rel=1e-10)
        assert r["p_adj"] == pytest.approx(stats.studentized_range.sf(q, k, df), rel=1e-5, abs=1e-9)
        half = stats.studentized_range.ppf(0.95, k, df) / np.sqrt(2) * se
        assert r["ci_low"] == pytest.approx(gi.mean() - gj.mean() - half, rel=1e-6)


def test_paired_within_subject_comparisons_match_ttest_rel(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(1600)
    n, k = 14, 4
    y = rng.normal(0, 1, (n, 1)) + np.linspace(0, 1, k) + rng.normal(0, 0.7, (n, k))
    rows = [{"id": f"s{s}", "t": f"t{j}", "y": float(y[s, j])} for s in range(n) for j in range(k)]
    pd.DataFrame(rows).to_csv(tmp_path / "p.csv", index=False, float_format="%.17g")
    b = run(kc, f'read "{tmp_path / "p.csv"}" as p\ncompare y across t in p subject id')
    assert b["design"]["paired"] is True and b["design"]["method"] == "holm"
    raw = []
    for r, (i, j) in zip(b["tables"]["pairs"], itertools.combinations(range(k), 2)):
        ref = stats.ttest_rel(y[:, i], y[:, j])
        assert r["statistic"] == pytest.approx(ref.statistic, rel=1e-10)
        assert r["p"] == pytest.approx(ref.pvalue, rel=1e-9)
        assert r["df"] == n - 1
        raw.append(ref.pvalue)
    for r, a in zip(b["tables"]["pairs"], multipletests(raw, method="holm")[1]):
        assert r["p_adj"] == pytest.approx(a, rel=1e-9)


def test_simple_effects_use_the_pooled_error_of_the_full_model(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(1700)
    rows = []
    for a in range(3):
        for bb in range(2):
            for _ in range(int(rng.integers(4, 9))):
                rows.append({"a": f"a{a}", "b": f"b{bb}", "y": float(rng.normal(10 + a * (bb + 0.5), 1))})
    df = pd.DataFrame(rows)
    df.to_csv(tmp_path / "s.csv", index=False, float_format="%.17g")
    b = run(kc, f'read "{tmp_path / "s.csv"}" as se\ncompare y across a in se by b')
    cells = df.groupby(["a", "b"]).y
    dfe = len(df) - 6
    mse = ((df.y - cells.transform("mean")) ** 2).sum() / dfe
    for r in b["tables"]["pairs"]:
        lvl = r["by"]["b"]
        gi = df.y[(df.a == r["a"]) & (df.b == lvl)]
        gj = df.y[(df.a == r["b"]) & (df.b == lvl)]
        se = np.sqrt(mse * (1 / len(gi) + 1 / len(gj)))
        q = abs(gi.mean() - gj.mean()) / se * np.sqrt(2)
        assert r["df"] == dfe
        assert r["p_adj"] == pytest.approx(stats.studentized_range.sf(q, 3, dfe), rel=1e-5, abs=1e-9)
    assert len(b["tables"]["pairs"]) == 6


def test_letters_follow_the_adjusted_p_values(kernel, tmp_path):
    km, kc = kernel
    # Far-apart means: every pair differs, so each level has its own letter, a from the top.
    groups = [np.array([1.0, 1.1, 0.9, 1.05]), np.array([5.0, 5.1, 4.9, 5.05]), np.array([3.0, 3.1, 2.9, 3.05])]
    write(tmp_path / "l.csv", groups, ["low", "high", "mid"])
    b = run(kc, f'read "{tmp_path / "l.csv"}" as l\ncompare y across g in l')
    letters = {c["levels"]["g"]: c["letters"] for c in b["tables"]["cells"]}
    assert letters == {"high": "a", "mid": "b", "low": "c"}
