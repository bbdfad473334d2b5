"""Benchmark: cold start to the first kernel_info_reply, and the median round trip of a
one-way ANOVA cell with its figure, for Partita and, as the anchor in the same run, for the
reference Python kernel (ipykernel) running scipy's f_oneway and a matplotlib SVG figure.

    python tests/bench/bench.py [--bin target/release/partita] [--smoke]

Targets (issue 2): Partita cold start <= 50 ms, round-trip median <= 5 ms.

Repeated measures (issue 3): a mixed ANOVA with sphericity on 5,000 subjects x 8 within levels
(3 between groups), target <= 50 ms of engine time. The figure printed is the whole round trip
of the `anova` cell through the kernel (engine, rendering with its figure, messaging), an upper
bound on the engine time. statsmodels' AnovaRM builds a dense design matrix, far too large at
that size, so the ratio is taken at 300 subjects x 8 levels (one within factor, as AnovaRM
cannot take a between factor), both run from this process.

Factorial (issue 4): two factors (4 x 3), 1,000,000 unbalanced rows, type 3: target <= 100 ms
after load; the round trip of the `anova` cell is printed beside statsmodels OLS + anova_lm
(typ 3, Sum contrasts) on the same data, in the same run.

Randomisation (issue 6): 100,000 draws, one-way, N = 1,000, k = 4: target <= 0.3 s on 2 cores;
scipy.stats.permutation_test (vectorized F) on the same data in the same run, target ratio
>= 50x. The kernel's peak resident memory (VmHWM) is printed after 10,000 and after 1,000,000
draws: it should stay flat.

This is a benchmark, not a test: it prints figures and ratios and fails only if something breaks.
"""
import argparse
import os
import pathlib
import statistics
import subprocess
import sys
import tempfile
import time

from jupyter_client.manager import KernelManager

ROOT = pathlib.Path(__file__).resolve().parents[2]
DATA = ROOT / "notebooks" / "data" / "snails.csv"

PARTITA_SETUP = f'read "{DATA}" as trial'
PARTITA_CELL = "anova weight across feed in trial"
PY_SETUP = f"""
import io, csv
import matplotlib
matplotlib.use("svg")
import matplotlib.pyplot as plt
from scipy.stats import f_oneway
from IPython.display import SVG, display
rows = [r for r in csv.DictReader(open({str(DATA)!r})) if r["weight"] not in ("", "NA")]
groups = {{}}
for r in rows:
    groups.setdefault(r["feed"], []).append(float(r["weight"]))
"""
PY_CELL = """
res = f_oneway(*groups.values())
fig, ax = plt.subplots(figsize=(5, 3.5))
for i, (k, v) in enumerate(groups.items()):
    ax.scatter([i] * len(v), v, alpha=0.5)
    ax.errorbar([i + 0.2], [sum(v) / len(v)], fmt="o", color="k")
buf = io.StringIO(); fig.savefig(buf, format="svg"); plt.close(fig)
display(SVG(buf.getvalue()))
res
"""


def run_cell(kc, code):
    msg_id = kc.execute(code)
    while True:
        r = kc.get_shell_msg(timeout=60)
        if r["parent_header"].get("msg_id") == msg_id:
            break
    if r["content"]["status"] != "ok":
        raise RuntimeError(f"cell failed: {r['content']}")
    while True:
        m = kc.get_iopub_msg(timeout=60)
        if m["parent_header"].get("msg_id") == msg_id and m["msg_type"] == "status" \
                and m["content"]["execution_state"] == "idle":
            return


def cold_start(name):
    km = KernelManager(kernel_name=name)
    t0 = time.perf_counter()
    km.start_kernel()
    kc = km.client()
    kc.start_channels()
    while True:
        msg_id = kc.kernel_info()
        try:
            r = kc.get_shell_msg(timeout=0.02)
        except Exception:
            continue
        if r["msg_type"] == "kernel_info_reply":
            break
    elapsed = time.perf_counter() - t0
    wait_for_iopub(kc)
    return km, kc, elapsed


def wait_for_iopub(kc, deadline=30.0):
    """Messages published before the client's subscription reaches the kernel are lost, so ask
    until a kernel_info request's status message arrives on IOPub (outside the timed part)."""
    end = time.perf_counter() + deadline
    while time.perf_counter() < end:
        msg_id = kc.kernel_info()
        t = time.perf_counter() + 0.25
        while time.perf_counter() < t:
            try:
                m = kc.get_iopub_msg(timeout=0.05)
            except Exception:
                continue
            if m["parent_header"].get("msg_id") == msg_id and m["msg_type"] == "status":
                # Drain this request's remaining status message and its reply.
                time.sleep(0.01)
                while True:
                    try:
                        kc.get_iopub_msg(timeout=0.01)
                    except Exception:
                        break
                while True:
                    try:
                        kc.get_shell_msg(timeout=0.01)
                    except Exception:
                        return
    raise RuntimeError("IOPub never connected")


def measure(name, setup, cell, starts, trips):
    times = []
    for _ in range(starts):
        km, kc, t = cold_start(name)
        times.append(t)
        kc.stop_channels()
        km.shutdown_kernel(now=True)
    return statistics.median(times), timed_cells(name, setup, cell, trips)


def rm_data(path, n, k, groups, seed=1):
    import numpy as np

    rng = np.random.default_rng(seed)
    base = rng.normal(20, 2, size=(n, 1))
    y = base + 0.1 * np.arange(k) + rng.normal(0, 1, size=(n, k)) * (1 + 0.2 * np.arange(k))
    with open(path, "w") as f:
        f.write("id,grp,time,y\n")
        for s in range(n):
            for t in range(k):
                f.write(f"s{s},g{s % groups},t{t},{y[s, t]:.4f}\n")
    return y


def timed_cells(name, setup, cell, reps):
    km, kc, _ = cold_start(name)
    run_cell(kc, setup)
    run_cell(kc, cell)
    rt = []
    for _ in range(reps):
        t0 = time.perf_counter()
        run_cell(kc, cell)
        rt.append(time.perf_counter() - t0)
    kc.stop_channels()
    km.shutdown_kernel(now=True)
    return statistics.median(rt)


def rm_bench(smoke):
    import pandas as pd
    from statsmodels.stats.anova import AnovaRM

    reps = 3 if smoke else 15
    tmp = pathlib.Path(tempfile.mkdtemp(prefix="partita-bench-rm-"))
    small, big = tmp / "rm300.csv", tmp / "rm5000.csv"
    rm_data(small, 300, 8, 1)
    rm_data(big, 5000, 8, 3)
    p_small = timed_cells("partita", f'read "{small}" as s', "anova y across time subject id in s", reps)
    p_big = timed_cells("partita", f'read "{big}" as b', "anova y across grp, time subject id in b", reps)
    df = pd.read_csv(small)
    sm_times = []
    for _ in range(reps):
        t0 = time.perf_counter()
        AnovaRM(df, "y", "id", within=["time"]).fit()
        sm_times.append(time.perf_counter() - t0)
    sm = statistics.median(sm_times)
    print(f"repeated-measures ANOVA with sphericity, round trip of the cell (median of {reps}):")
    print(f"  partita  300 x 8          {p_small * 1e3:8.2f} ms")
    print(f"  statsmodels AnovaRM 300 x 8 {sm * 1e3:6.2f} ms (fit only, no sphericity, no figure)")
    print(f"  ratio statsmodels/partita {sm / p_small:6.1f}x")
    print(f"  partita  5000 x 8, 3 groups {p_big * 1e3:6.2f} ms   (target <= 50 ms engine time)")


def factorial_bench(smoke):
    import numpy as np
    import pandas as pd
    import statsmodels.api as sm
    from statsmodels.formula.api import ols

    n = 50_000 if smoke else 1_000_000
    reps = 3 if smoke else 7
    rng = np.random.default_rng(4)
    # Unbalanced: cell probabilities differ.
    p = rng.dirichlet(np.ones(12) * 3)
    cell = rng.choice(12, size=n, p=p)
    a, b = cell // 3, cell % 3
    y = 10 + 0.3 * a + 0.5 * b + 0.1 * a * b + rng.normal(0, 1, size=n)
    df = pd.DataFrame({"a": np.array(["a1", "a2", "a3", "a4"])[a], "b": np.array(["b1", "b2", "b3"])[b], "y": np.round(y, 4)})
    path = pathlib.Path(tempfile.mkdtemp(prefix="partita-bench-fac-")) / "fac.csv"
    df.to_csv(path, index=False)
    p_time = timed_cells("partita", f'read "{path}" as f', "anova y across a, b in f with ss 3", reps)
    t0 = time.perf_counter()
    fit = ols("y ~ C(a, Sum) * C(b, Sum)", data=df).fit()
    sm.stats.anova_lm(fit, typ=3)
    sm_time = time.perf_counter() - t0
    print(f"factorial ANOVA 4 x 3, {n:,} unbalanced rows, type 3 (after load):")
    print(f"  partita  {p_time * 1e3:8.2f} ms   (median of {reps}; target <= 100 ms at 1,000,000 rows)")
    print(f"  statsmodels OLS + anova_lm {sm_time * 1e3:8.1f} ms (one run)")
    print(f"  ratio statsmodels/partita {sm_time / p_time:6.1f}x")


def vm_hwm_kb(km):
    try:
        pid = km.provisioner.process.pid
        for line in open(f"/proc/{pid}/status"):
            if line.startswith("VmHWM:"):
                return int(line.split()[1])
    except Exception:
        return None


def permutation_bench(smoke):
    import numpy as np
    from scipy import stats

    sys.path.insert(0, str(ROOT / "tests" / "python"))
    from test_permute import f_vectorized  # the same F as the randomisation tests use

    draws = 10_000 if smoke else 100_000
    rng = np.random.default_rng(6)
    groups = [rng.normal(10 + 0.05 * i, 1.0, size=250) for i in range(4)]
    path = pathlib.Path(tempfile.mkdtemp(prefix="partita-bench-perm-")) / "perm.csv"
    with open(path, "w") as f:
        f.write("g,y\n")
        for i, g in enumerate(groups):
            for v in g:
                f.write(f"G{i},{v:.6f}\n")
    km, kc, _ = cold_start("partita")
    run_cell(kc, f'read "{path}" as p')
    run_cell(kc, "permute y across g in p with draws 1000, seed 1")
    times = []
    for rep in range(1 if smoke else 5):
        t0 = time.perf_counter()
        run_cell(kc, f"permute y across g in p with draws {draws}, seed {rep + 2}")
        times.append(time.perf_counter() - t0)
    p_time = statistics.median(times)
    mem_small = vm_hwm_kb(km)
    if not smoke:
        run_cell(kc, "permute y across g in p with draws 1000000, seed 9")
    mem_big = vm_hwm_kb(km)
    kc.stop_channels()
    km.shutdown_kernel(now=True)

    t0 = time.perf_counter()
    stats.permutation_test(groups, f_vectorized, permutation_type="independent", n_resamples=draws,
                           alternative="greater", vectorized=True, rng=np.random.default_rng(0))
    sp_time = time.perf_counter() - t0
    print(f"randomisation test, one-way, N = 1,000, k = 4, {draws:,} draws ({os.cpu_count()} cores):")
    print(f"  partita  {p_time * 1e3:8.1f} ms   (round trip; target <= 300 ms at 100,000 draws on 2 cores)")
    print(f"  scipy permutation_test (vectorized) {sp_time * 1e3:8.1f} ms")
    print(f"  ratio scipy/partita {sp_time / p_time:6.1f}x   (target >= 50x)")
    if mem_small and mem_big:
        print(f"  kernel peak memory: {mem_small / 1024:.1f} MiB after {draws:,} draws, {mem_big / 1024:.1f} MiB after 1,000,000 more")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", default=str(ROOT / "target" / "release" / "partita"))
    ap.add_argument("--smoke", action="store_true", help="a few seconds, to prove the script works")
    ap.add_argument("--only", choices=["permutation", "factorial", "repeated"],
                    help="run one benchmark alone")
    a = ap.parse_args()
    starts, trips = (2, 3) if a.smoke else (15, 200)
    prefix = pathlib.Path(tempfile.mkdtemp(prefix="partita-bench-"))
    subprocess.run([a.bin, "install", "--prefix", str(prefix)], check=True, capture_output=True)
    subprocess.run([sys.executable, "-m", "ipykernel", "install", "--prefix", str(prefix), "--name", "bench-python"],
                   check=True, capture_output=True)
    os.environ["JUPYTER_PATH"] = str(prefix / "share" / "jupyter")
    if a.only:
        {"permutation": permutation_bench, "factorial": factorial_bench, "repeated": rm_bench}[a.only](a.smoke)
        return
    p_start, p_rt = measure("partita", PARTITA_SETUP, PARTITA_CELL, starts, trips)
    y_start, y_rt = measure("bench-python", PY_SETUP, PY_CELL, starts, trips)
    print(f"binary: {a.bin}{'  (smoke run: few repetitions)' if a.smoke else ''}")
    print(f"cold start to first kernel_info_reply (median of {starts}):")
    print(f"  partita  {p_start * 1e3:8.1f} ms   (target <= 50 ms)")
    print(f"  python   {y_start * 1e3:8.1f} ms")
    print(f"  ratio python/partita {y_start / p_start:6.1f}x")
    print(f"one-way ANOVA cell with figure, round trip (median of {trips}):")
    print(f"  partita  {p_rt * 1e3:8.2f} ms   (target <= 5 ms)")
    print(f"  python   {y_rt * 1e3:8.2f} ms")
    print(f"  ratio python/partita {y_rt / p_rt:6.1f}x")
    rm_bench(a.smoke)
    factorial_bench(a.smoke)
    permutation_bench(a.smoke)


if __name__ == "__main__":
    main()
