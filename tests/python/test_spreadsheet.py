"""Spreadsheets in: a workbook written here with openpyxl (PyPI, pinned) is read through the real
client — the sheet chosen by name, the header below a preamble, numbers and text mapped to
numeric and factor columns, an empty cell missing — and its ANOVA matches scipy's on the same
numbers; an unknown sheet lists the sheets."""
import numpy as np
import pytest
from openpyxl import Workbook
from scipy import stats

from conftest import bundle_of, execute


def test_xlsx_sheet_header_and_types(kernel, tmp_path):
    km, kc = kernel
    rng = np.random.default_rng(3000)
    wb = Workbook()
    ws = wb.active
    ws.title = "Run 1"
    ws.append(["ignored", 1])
    run2 = wb.create_sheet("Run 2")
    run2.append(["Plate reader export, run 2"])
    run2.append(["instrument: invented"])
    run2.append(["well", "dose", "od", "note"])
    values = {}
    for i in range(18):
        dose = ["low", "mid", "high"][i % 3]
        od = float(np.round(rng.normal(0.5 + 0.1 * (i % 3), 0.05), 4))
        if i == 7:
            run2.append([f"W{i:02d}", dose, None, "bubble"])
            continue
        run2.append([f"W{i:02d}", dose, od, ""])
        values.setdefault(dose, []).append(od)
    path = tmp_path / "plate.xlsx"
    wb.save(path)
    reply, msgs = execute(kc, f'read "{path}" as plate with sheet "Run 2", header 3\nanova od across dose in plate')
    assert reply["content"]["status"] == "ok", reply["content"]
    b = bundle_of(msgs)
    ref = stats.f_oneway(*[np.array(values[d]) for d in ["low", "mid", "high"]])
    assert b["tables"]["anova"][0]["f"] == pytest.approx(ref.statistic, rel=1e-9)
    assert b["provenance"]["rows_used"] == 17
    assert 'sheet "Run 2"' in b["provenance"]["source"]
    assert any("file line" in n and "11" in n for n in b["notes"]), b["notes"]  # sheet row 11 is W07
    reply, msgs = execute(kc, f'read "{path}" as plate with sheet "Run 3"')
    assert reply["content"]["status"] == "error"
    assert 'has no sheet "Run 3"' in reply["content"]["evalue"]
    assert '"Run 1", "Run 2"' in "\n".join(reply["content"]["traceback"])
