"""Results that follow the data, through the real client (jupyter_client): a file that gains a
batch of rows between executions is re-read with a summary of what changed, a rerun analysis
shows its previous headline beside the new one, and an unchanged file is not parsed again."""
from conftest import bundle_of, execute


def run(kc, code):
    reply, msgs = execute(kc, code)
    assert reply["content"]["status"] == "ok", reply["content"]
    return bundle_of(msgs)


def test_appended_batch_is_summarised_and_reruns_show_was_and_now(kernel, tmp_path):
    km, kc = kernel
    path = tmp_path / "plate.csv"
    rows = ["well,dose,od"] + [f"W{i:02d},{['low', 'mid', 'high'][i % 3]},{0.5 + (i % 3) * 0.2 + (i % 5) * 0.03:.3f}" for i in range(18)]
    path.write_text("\n".join(rows) + "\n")
    run(kc, f'read "{path}" as plate')
    first = run(kc, "anova od across dose in plate")
    assert first["provenance"]["rows_used"] == 18
    same = run(kc, f'read "{path}" as plate')
    assert "unchanged since it was read" in same["notes"][0]
    # The next batch: 6 more wells, one new dose and one missing reading.
    batch = [f"W{i:02d},{['low', 'mid', 'high'][i % 3]},{0.6 + (i % 3) * 0.25 + (i % 4) * 0.02:.3f}" for i in range(18, 23)]
    batch.append("W23,top,")
    with open(path, "a") as f:
        f.write("\n".join(batch) + "\n")
    again = run(kc, f'read "{path}" as plate')
    notes = again["notes"]
    assert notes[0].startswith(f"{path} changed since it was read at ")
    assert "rows: 18 → 24 (6 added, 0 removed or changed)" in notes[0]
    assert "dose: new level top" in notes
    assert "od: 1 more missing value" in notes
    rerun = run(kc, "anova od across dose in plate")
    was_now = rerun["notes"][0]
    assert was_now.startswith("was dose: F(2, 15) = ") and ", n = 18 → now dose: F(2, 20) = " in was_now, was_now
    assert was_now.endswith(", n = 23")
    # A statement not rerun on changed data has no such line.
    assert not any(n.startswith("was ") for n in run(kc, "anova od across dose in plate")["notes"])
