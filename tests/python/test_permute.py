"""Randomisation tests through the kernel, against outside references: exact p on tiny designs
against brute-force enumeration written here; Monte Carlo p against scipy.stats.permutation_test
(PyPI, pinned) with the same statistic, within 4 Monte Carlo standard errors; for normal data and
many draws, p close to the F-distribution p within Monte Carlo error; the same seed gives the
same p with 1, 2 and 4 threads; progress arrives as update_display_data and an interrupted run
sends its partial result before the Interrupted error."""
import itertools
import math
import time

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from conftest import bundle_of, execute


def run(kc, code, timeout=120):
    reply, msgs = execute(kc, code, timeout=timeout)
    assert reply["content"]["status"] == "ok", reply["content"]
    return bundle_of(msgs)


def write(path, groups):
    with open(path, "w") as f:
        f.write("g,y\n")
        for i, g in enumerate(groups):
            for v in g:
                f.write(f"G{i},{float(v)!r}\n")


def f_stat(groups):
    return stats.f_oneway(*groups).statistic


def f_vectorized(*groups, axis=-1):
    """The one-way F along `axis`, for scipy's vectorized permutation_test."""
    n = [g.shape[axis] for g in groups]
    means = [g.mean(axis=axis) for g in groups]
    total = sum(n)
    grand = sum(m * k for m, k in zip(means, n)) / total
    ssb = sum(k * (m - grand) ** 2 for m, k in zip(means, n))
    ssw = sum(((g - np.expand_dims(m, axis)) ** 2).sum(axis=axis) for g, m in zip(groups, means))
    return (ssb / (len(groups) - 1)) / (ssw / (total - len(groups)))


def test_exact_one_way_matches_brute_force(kernel, tmp_path):
    km, kc = kernel
    groups = [np.array([3.1, 4.0, 2.2]), np.array([5.5, 6.1, 4.9]), np.array([4.4, 3.9])]
    write(tmp_path / "e.csv", groups)
    b = run(kc, f'read "{tmp_path / "e.csv"}" as e\npermute y across g in e with draws 10000, seed 1')
    r = b["tables"]["randomisation"][0]
    allv = np.concatenate(groups)
    sizes = [len(g) for g in groups]
    f_obs = f_stat(groups)
    labels = sorted(sum(([i] * n for i, n in enumerate(sizes)), []))
    seen, ge = set(), 0
    for perm in itertools.permutations(labels):
        if perm in seen:
            continue
        seen.add(perm)
        perm = np.array(perm)
        f = f_stat([allv[perm == i] for i in range(len(sizes))])
        ge += f >= f_obs * (1 - 1e-9)
    assert len(seen) == math.factorial(8) // (6 * 6 * 2) == 560
    assert r["exact"] is True and r["draws"] == 560
    assert r["p"] == pytest.approx(ge / len(seen), rel=1e-12)
    assert r["f_observed"] == pytest.approx(f_obs, rel=1e-12)


def test_exact_within_subjects_matches_brute_force(kernel, tmp_path):
    km, kc = kernel
    y = np.array([[1.0, 2.5, 2.0], [2.0, 3.9, 3.1], [0.5, 1.1, 2.4], [1.5, 2.0, 3.5]])
    rows = [{"id": f"s{s}", "t": f"t{j}", "y": y[s, j]} for s in range(4) for j in range(3)]
    pd.DataFrame(rows).to_csv(tmp_path / "w.csv", index=False, float_format="%.17g")
    b = run(kc, f'read "{tmp_path / "w.csv"}" as w\npermute y across t in w subject id with draws 2000, seed 1')
    r = b["tables"]["randomisation"][0]

    def f_rm(m):
        n, k = m.shape
        gm = m.mean()
        ss_t = n * ((m.mean(0) - gm) ** 2).sum()
        ss_s = k * ((m.mean(1) - gm) ** 2).sum()
        ss_e = ((m - gm) ** 2).sum() - ss_t - ss_s
        return (ss_t / (k - 1)) / (ss_e / ((k - 1) * (n - 1)))

    f_obs = f_rm(y)
    perms = list(itertools.permutations(range(3)))
    ge = total = 0
    for choice in itertools.product(perms, repeat=4):
        m = np.array([y[s, list(p)] for s, p in enumerate(choice)])
        ge += f_rm(m) >= f_obs * (1 - 1e-9)
        total += 1
    assert total == 6 ** 4 and r["exact"] is True and r["draws"] == total
    assert r["p"] == pytest.approx(ge / total, rel=1e-12)


@pytest.mark.parametrize("seed", range(3))
def test_monte_carlo_p_matches_scipy_permutation_test(kernel, tmp_path, seed):
    km, kc = kernel
    rng = np.random.default_rng(2000 + seed)
    groups = [rng.exponential(1.0 + 0.25 * i, size=int(rng.integers(8, 20))) for i in range(3)]
    write(tmp_path / "m.csv", groups)
    m = 20000
    b = run(kc, f'read "{tmp_path / "m.csv"}" as m{seed}\npermute y across g in m{seed} with draws {m}, seed {seed + 11}')
    r = b["tables"]["randomisation"][0]
    ref = stats.permutation_test(groups, f_vectorized, permutation_type="independent", n_resamples=m,
                                 alternative="greater", vectorized=True, rng=np.random.default_rng(seed))
    assert f_vectorized(*groups) == pytest.approx(r["f_observed"], rel=1e-10)
    p = (r["p"] + ref.pvalue) / 2
    se = math.sqrt(2 * p * (1 - p) / m) + 1 / m
    assert abs(r["p"] - ref.pvalue) <= 4 * se, (r["p"], ref.pvalue, se)
    assert r["p_ci_low"] <= r["p"] <= r["p_ci_high"]
    # The 99% interval is Wilson's score interval for b/m: statsmodels proportion_confint.
    b = round(r["p"] * (m + 1) - 1)
    lo, hi = proportion_confint(b, m, alpha=0.01, method="wilson")
    assert r["p_ci_low"] == pytest.approx(lo, rel=1e-9, abs=1e-15)
    assert r["p_ci_high"] == pytest.approx(hi, rel=1e-9)


def test_normal_data_agree_with_the_f_distribution(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(2100)
    groups = [rng.normal(10 + 0.35 * i, 1.0, size=25) for i in range(4)]
    write(tmp_path / "n.csv", groups)
    m = 100000
    b = run(kc, f'read "{tmp_path / "n.csv"}" as nrm\npermute y across g in nrm with draws {m}, seed 5')
    r = b["tables"]["randomisation"][0]
    p_f = stats.f_oneway(*groups).pvalue
    assert r["p_f"] == pytest.approx(p_f, rel=1e-9)
    # Monte Carlo error plus a small allowance for the F approximation itself at n = 25.
    assert abs(r["p"] - p_f) <= 4 * math.sqrt(p_f * (1 - p_f) / m) + 0.01 * p_f, (r["p"], p_f)


def test_same_seed_same_p_with_1_2_and_4_threads(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(2200)
    groups = [rng.normal(0, 1, size=30) + 0.2 * i for i in range(3)]
    write(tmp_path / "s.csv", groups)
    run(kc, f'read "{tmp_path / "s.csv"}" as thr')
    ps = [run(kc, f"permute y across g in thr with draws 30000, seed 99, threads {t}")["tables"]["randomisation"][0]["p"]
          for t in (1, 2, 4)]
    assert ps[0] == ps[1] == ps[2]
    other = run(kc, "permute y across g in thr with draws 30000, seed 100")["tables"]["randomisation"][0]["p"]
    assert other != ps[0]


def test_factorial_freedman_lane_under_the_null_is_calibrated(kernel, tmp_path):
    km, kc = kernel
    # No effects at all: each effect's randomisation p should be close to its F-distribution p.
    rng = np.random.default_rng(2300)
    rows = [{"a": f"a{a}", "b": f"b{b}", "y": float(rng.normal(0, 1))} for a in range(3) for b in range(2) for _ in range(int(rng.integers(6, 12)))]
    pd.DataFrame(rows).to_csv(tmp_path / "f.csv", index=False, float_format="%.17g")
    m = 40000
    b = run(kc, f'read "{tmp_path / "f.csv"}" as fl\npermute y across a, b in fl with draws {m}, seed 3')
    for r in b["tables"]["randomisation"]:
        assert abs(r["p"] - r["p_f"]) <= 4 * math.sqrt(r["p_f"] * (1 - r["p_f"]) / m) + 0.03, r


def test_progress_updates_in_place_and_interrupt_gives_a_partial_result(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(2400)
    write(tmp_path / "big.csv", [rng.normal(0, 1, size=2500) for _ in range(4)])
    run(kc, f'read "{tmp_path / "big.csv"}" as big')
    msg_id = kc.execute("permute y across g in big with draws 10000000, seed 1")
    updates, display_id, partial, error = 0, None, None, None
    deadline = time.time() + 120
    while time.time() < deadline:
        m = kc.get_iopub_msg(timeout=60)
        if m["parent_header"].get("msg_id") != msg_id:
            continue
        t = m["msg_type"]
        if t == "display_data" and "display_id" in m["content"].get("transient", {}):
            display_id = m["content"]["transient"]["display_id"]
        elif t == "update_display_data":
            assert m["content"]["transient"]["display_id"] == display_id
            updates += 1
            if updates == 2:
                km.interrupt_kernel()
        elif t == "display_data" and "application/vnd.partita.result+json" in m["content"]["data"]:
            partial = m["content"]["data"]["application/vnd.partita.result+json"]
        elif t == "error":
            error = m["content"]
        elif t == "status" and m["content"]["execution_state"] == "idle":
            break
    assert display_id is not None and updates >= 2
    assert partial is not None, "the partial result is sent before the error"
    row = partial["tables"]["randomisation"][0]
    assert row["partial"] is True and 0 < row["draws"] < 10000000
    assert error["ename"] == "Interrupted"
    # The kernel is still usable.
    assert run(kc, "permute y across g in big with draws 100, seed 2")["tables"]["randomisation"][0]["draws"] == 100
