"""Power, sample size and the η² interval through the kernel, against outside references:
statsmodels FTestAnovaPower (PyPI; its nobs is the total N), an independent noncentral-F
inversion written here with scipy.stats.ncf and scipy.optimize.brentq, a Monte Carlo simulation
of the repeated-measures F test written here with numpy, and Cohen (1988) table values."""
import numpy as np
import pytest
from scipy import optimize, stats
from statsmodels.stats.power import FTestAnovaPower

from conftest import bundle_of, execute


def power_row(kc, code):
    reply, msgs = execute(kc, code)
    assert reply["content"]["status"] == "ok", reply["content"]
    return bundle_of(msgs)["tables"]["power"][0]


GRID = [(k, f, n, a) for k in (2, 3, 4, 6) for f in (0.1, 0.25, 0.4, 0.7) for n in (5, 20, 60) for a in (0.05, 0.01)]


def test_power_matches_statsmodels_over_a_grid(kernel):
    km, kc = kernel
    worst = 0.0
    for k, f, n, a in GRID:
        row = power_row(kc, f"power groups {k} with f {f}, n {n}, alpha {a}")
        ref = FTestAnovaPower().power(effect_size=f, nobs=k * n, alpha=a, k_groups=k)
        assert row["power"] == pytest.approx(ref, rel=1e-6, abs=1e-9), (k, f, n, a)
        worst = max(worst, abs(row["power"] - ref))
    print(f"power vs statsmodels: {len(GRID)} points, worst absolute difference {worst:.2e}")


@pytest.mark.parametrize("k,f,target", [(3, 0.25, 0.8), (4, 0.4, 0.9), (2, 0.1, 0.8), (5, 0.25, 0.95)])
def test_solved_n_is_the_ceiling_of_statsmodels_solve_power(kernel, k, f, target):
    km, kc = kernel
    row = power_row(kc, f"power groups {k} with f {f}, power {target}")
    nobs = FTestAnovaPower().solve_power(effect_size=f, nobs=None, alpha=0.05, power=target, k_groups=k)
    # statsmodels solves for a real total N; the smallest whole n per group is the next n with
    # k·n ≥ that N, unless rounding puts them on either side of it.
    assert row["n_per_group"] == int(np.ceil(nobs / k - 1e-9))
    assert row["power"] >= target


def test_cohen_table_values_recalled_from_memory(kernel):
    # Cohen (1988), Statistical Power Analysis for the Behavioral Sciences, table 8.4.4
    # (u = 2, i.e. 3 groups, α = .05, power .80): n = 322, 52, 21 for f = .10, .25, .40.
    # These are recalled from memory; Cohen's approximations can differ by one from an exact
    # computation, hence the tolerance.
    km, kc = kernel
    for f, n in [(0.1, 322), (0.25, 52), (0.4, 21)]:
        row = power_row(kc, f"power groups 3 with f {f}, power 0.8")
        assert abs(row["n_per_group"] - n) <= 1, (f, row["n_per_group"], n)


def test_eta2_interval_matches_an_independent_ncf_inversion(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(11)
    groups = [rng.normal(m, 1.0, size=12) for m in (0.0, 0.5, 1.1)]
    path = tmp_path / "ci.csv"
    path.write_text("g,y\n" + "".join(f"L{i},{float(v)!r}\n" for i, g in enumerate(groups) for v in g))
    reply, msgs = execute(kc, f'read "{path}" as ci\nanova y across g in ci with level 0.9')
    row = bundle_of(msgs)["tables"]["anova"][0]
    F, d1, d2, N = row["f"], 2, 33, 36

    def lam(q):  # λ with ncf.cdf(F; λ) = q, floored at 0 (Steiger 2004)
        if stats.f.cdf(F, d1, d2) < q:
            return 0.0
        return optimize.brentq(lambda L: stats.ncf.cdf(F, d1, d2, L) - q, 0.0, 1000.0, xtol=1e-12)

    lo, hi = lam(0.95), lam(0.05)
    assert row["level"] == 0.9
    assert row["eta2_ci_low"] == pytest.approx(lo / (lo + N), rel=1e-6, abs=1e-9)
    assert row["eta2_ci_high"] == pytest.approx(hi / (hi + N), rel=1e-6)
    assert row["f_ci_high"] == pytest.approx(np.sqrt(hi / N), rel=1e-6)


def rm_power_by_simulation(m, n, f, rho, alpha, reps, rng):
    """Power of the univariate repeated-measures F test under compound symmetry, simulated."""
    sigma = 1.0
    means = np.linspace(-1, 1, m)
    means = means / np.sqrt(np.mean((means - means.mean()) ** 2)) * f * sigma
    cov = sigma**2 * ((1 - rho) * np.eye(m) + rho * np.ones((m, m)))
    crit = stats.f.isf(alpha, m - 1, (n - 1) * (m - 1))
    y = rng.multivariate_normal(means, cov, size=(reps, n))  # reps × n × m
    grand = y.mean(axis=(1, 2), keepdims=True)
    cond = y.mean(axis=1, keepdims=True)
    subj = y.mean(axis=2, keepdims=True)
    ss_cond = n * ((cond - grand) ** 2).sum(axis=(1, 2))
    ss_err = ((y - cond - subj + grand) ** 2).sum(axis=(1, 2))
    F = (ss_cond / (m - 1)) / (ss_err / ((n - 1) * (m - 1)))
    return float(np.mean(F > crit))


@pytest.mark.parametrize("m,n,f,rho", [(3, 12, 0.3, 0.5), (4, 10, 0.25, 0.7), (5, 15, 0.2, 0.3)])
def test_within_power_matches_a_simulation_of_the_test(kernel, m, n, f, rho):
    km, kc = kernel
    row = power_row(kc, f"power within {m} with f {f}, n {n}, rho {rho}")
    reps = 20000
    sim = rm_power_by_simulation(m, n, f, rho, 0.05, reps, np.random.default_rng(m * 100 + n))
    se = np.sqrt(sim * (1 - sim) / reps)
    assert abs(row["power"] - sim) < 4 * se + 1e-3, (row["power"], sim, se)
