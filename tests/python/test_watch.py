"""Live refresh through the real client (jupyter_client): a file read `with watch` that gains
a batch (written in chunks, as an instrument does) refreshes every display that used it, once,
by update_display_data with the display's id and, as parent header, the execute_request that
created it — also when other cells ran in between. The refreshed F is checked against
scipy.stats.f_oneway on the new data. A deleted file leaves the last result with a banner."""
import time

import pytest
from scipy import stats

from conftest import execute

BUNDLE = "application/vnd.partita.result+json"
DOSES = ["low", "mid", "high"]


def rows(start, stop):
    return [f"W{i:03d},{DOSES[i % 3]},{0.5 + (i % 3) * 0.15 + ((i * 7) % 11) * 0.02:.3f}" for i in range(start, stop)]


def live(kc, code):
    reply, msgs = execute(kc, code)
    assert reply["content"]["status"] == "ok", reply["content"]
    shown = [m for m in msgs if BUNDLE in m["content"].get("data", {})]
    assert shown[-1]["msg_type"] == "display_data", [m["msg_type"] for m in msgs]
    return shown[-1]["content"]["transient"]["display_id"], reply["parent_header"]["msg_id"], shown[-1]["content"]["data"][BUNDLE]


def updates(kc, seconds):
    """update_display_data messages arriving within `seconds`."""
    out, end = [], time.monotonic() + seconds
    while time.monotonic() < end:
        try:
            m = kc.get_iopub_msg(timeout=max(0.05, end - time.monotonic()))
        except Exception:
            break
        if m["msg_type"] == "update_display_data":
            out.append(m)
    return out


def f_of(b):
    return b["tables"]["anova"][0]["f"]


def test_a_watched_file_refreshes_its_displays_once_under_their_cells(kernel, tmp_path):
    km, kc = kernel
    path = tmp_path / "plate.csv"
    path.write_text("\n".join(["well,dose,od"] + rows(0, 24)) + "\n")
    read_id, read_parent, _ = live(kc, f'read "{path}" as plate with watch')
    anova_id, anova_parent, before = live(kc, "anova od across dose in plate")
    assert read_id != anova_id
    # Other cells in between: the updates still go under the cells that made the displays.
    reply, _ = execute(kc, "help anova")
    assert reply["content"]["status"] == "ok"
    desc_id, desc_parent, _ = live(kc, "describe od across dose in plate")
    updates(kc, 0.5)  # drain
    # The next batch, written in three chunks 100 ms apart, the middle one ending mid-line.
    text = "\n".join(rows(24, 36)) + "\n"
    with open(path, "a") as f:
        for chunk in (text[:40], text[40:95], text[95:]):
            f.write(chunk)
            f.flush()
            time.sleep(0.1)
    got = updates(kc, 3.0)
    ids = [m["content"]["transient"]["display_id"] for m in got]
    # One update per display per change (the chunks are debounced into one change).
    assert sorted(ids) == sorted([read_id, anova_id, desc_id]), ids
    by_id = {m["content"]["transient"]["display_id"]: m for m in got}
    assert by_id[read_id]["parent_header"]["msg_id"] == read_parent
    assert by_id[desc_id]["parent_header"]["msg_id"] == desc_parent
    assert by_id[anova_id]["parent_header"]["msg_id"] == anova_parent
    after = by_id[anova_id]["content"]["data"][BUNDLE]
    assert after["refresh"]["ok"] is True
    assert after["refresh"]["rows"] == 36 and after["refresh"]["previous_rows"] == 24
    assert after["provenance"]["rows_used"] == 36
    groups = {d: [] for d in DOSES}
    for line in rows(0, 36):
        _, dose, od = line.split(",")
        groups[dose].append(float(od))
    ref = stats.f_oneway(*groups.values())
    assert f_of(after) == pytest.approx(ref.statistic, rel=1e-9)
    assert after["tables"]["anova"][0]["p"] == pytest.approx(ref.pvalue, rel=1e-8)
    assert f_of(after) != pytest.approx(f_of(before))
    assert after["notes"][0].startswith("was dose: F(2, 21)") and "now dose: F(2, 33)" in after["notes"][0]
    html = by_id[anova_id]["content"]["data"]["text/html"]
    assert "refreshed at" in html and "36 rows (was 24)" in html
    # No change, no update.
    path.touch()
    assert updates(kc, 1.5) == []
    # Deleted: every display keeps its last result, with a banner saying why.
    path.unlink()
    got = updates(kc, 3.0)
    by_id = {m["content"]["transient"]["display_id"]: m for m in got}
    assert {read_id, anova_id} <= set(by_id), list(by_id)
    gone = by_id[anova_id]["content"]["data"][BUNDLE]
    assert gone["refresh"]["ok"] is False
    assert "could not be read again" in gone["refresh"]["text"]
    assert f_of(gone) == pytest.approx(ref.statistic, rel=1e-9)
    # The kernel still answers.
    reply, _ = execute(kc, "help")
    assert reply["content"]["status"] == "ok"



def notebook(cells):
    return {"nbformat": 4, "nbformat_minor": 5, "metadata": {},
            "cells": [{"cell_type": "code", "id": f"c{i}", "metadata": {}, "execution_count": None,
                       "outputs": [], "source": c} for i, c in enumerate(cells)]}


def wait_for(pred, seconds):
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        v = pred()
        if v:
            return v
        time.sleep(0.1)
    raise AssertionError("timed out")


def test_partita_run_watch_reruns_the_notebook_when_its_data_changes(tmp_path):
    import json
    import signal
    import subprocess

    from conftest import BINARY

    data = tmp_path / "plate.csv"
    data.write_text("\n".join(["well,dose,od"] + rows(0, 24)) + "\n")
    nb = tmp_path / "plate.ipynb"
    nb.write_text(json.dumps(notebook(['read "plate.csv" as plate', "anova od across dose"])))
    out, html = tmp_path / "out.ipynb", tmp_path / "out.html"
    err = open(tmp_path / "stderr.txt", "w+")
    proc = subprocess.Popen([str(BINARY), "run", str(nb), "--watch", "--output", str(out), "--html", str(html)],
                            stdout=subprocess.DEVNULL, stderr=err)

    def f_now():
        if not out.exists():
            return None
        cells = json.loads(out.read_text())["cells"]
        return cells[1]["outputs"][-1]["data"][BUNDLE]

    try:
        first = wait_for(f_now, 60)
        assert first["provenance"]["rows_used"] == 24
        assert "run 1 at" in html.read_text()
        with open(data, "a") as f:
            f.write("\n".join(rows(24, 36)) + "\n")
        second = wait_for(lambda: (b := f_now()) and b["provenance"]["rows_used"] == 36 and b, 30)
        groups = {d: [] for d in DOSES}
        for line in rows(0, 36):
            _, dose, od = line.split(",")
            groups[dose].append(float(od))
        assert f_of(second) == pytest.approx(stats.f_oneway(*groups.values()).statistic, rel=1e-9)
        wait_for(lambda: "run 2 at" in html.read_text() and "plate.csv changed" in html.read_text(), 10)
        # The data file deleted: the run fails at the read, the last good outputs stay.
        kept = out.read_text()
        data.unlink()
        wait_for(lambda: "outputs of the run at" in open(tmp_path / "stderr.txt").read(), 30)
        assert out.read_text() == kept
        log = open(tmp_path / "stderr.txt").read()
        assert "plate.csv changed; running" in log and "cannot read" in log, log
    finally:
        proc.send_signal(signal.SIGINT)
        proc.wait(timeout=10)
        err.close()
