"""Results out, through the real client: `save LAST` writes a PNG that decodes with Pillow (PyPI,
pinned) at the size the stated dpi gives, with dark text pixels in the axis-label region, and a
CSV table that reads back with the numbers of the result bundle."""
import csv

import pytest
from PIL import Image

from conftest import ROOT, bundle_of, execute


def run(kc, code):
    reply, msgs = execute(kc, code)
    assert reply["content"]["status"] == "ok", reply["content"]
    return msgs


@pytest.mark.parametrize("dpi", [150, 300])
def test_png_decodes_at_the_stated_size_with_axis_text(kernel, tmp_path, dpi):
    km, kc = kernel
    data = ROOT / "notebooks" / "data" / "snails.csv"
    msgs = run(kc, f'read "{data}" as snails\nanova weight across feed in snails')
    svg = next(m["content"]["data"]["image/svg+xml"] for m in reversed(msgs) if "image/svg+xml" in m["content"].get("data", {}))
    width_px = float(svg.split('width="')[1].split('"')[0])
    height_px = float(svg.split('height="')[1].split('"')[0])
    out = tmp_path / f"fig{dpi}.png"
    msgs = run(kc, f'save LAST to "{out}" with dpi {dpi}')
    assert f"at {dpi} dpi" in msgs[-1]["content"]["data"]["text/plain"]
    img = Image.open(out)
    img.load()
    scale = dpi / 96
    assert img.size == (int(-(-width_px * scale // 1)), int(-(-height_px * scale // 1)))
    grey = img.convert("L")
    w, h = grey.size
    # The x-axis label region: the bottom tenth of the figure, middle half of its width.
    region = grey.crop((w // 4, int(h * 0.9), 3 * w // 4, h))
    dark = sum(1 for v in region.tobytes() if v < 100)
    assert dark > 20 * scale, f"{dark} dark pixels in the axis-label region"


def test_csv_table_reads_back(kernel, tmp_path):
    km, kc = kernel
    data = ROOT / "notebooks" / "data" / "snails.csv"
    msgs = run(kc, f'read "{data}" as snails2\nanova weight across feed in snails2')
    b = bundle_of(msgs)
    out = tmp_path / "anova.csv"
    run(kc, f'save LAST to "{out}"')
    rows = list(csv.reader(open(out, newline="")))
    assert rows[0][:3] == ["Source", "df", "SS"]
    assert rows[1][0] == "feed" and float(rows[1][2]) == pytest.approx(b["tables"]["anova"][0]["ss"], rel=1e-4)
