"""Draws Partita's logo (three bars of rising height over a baseline, our own design) as
PNG files at 32 and 64 pixels and as SVG, with the standard library only.

Run from this folder: python3 make_logos.py  (writes partita/logo-*.png and logo-svg.svg)
"""
import struct
import zlib

BG = (0x1F, 0x5F, 0x9E, 255)
FG = (255, 255, 255, 255)
ACCENT = (0xD9, 0x7A, 0x1E, 255)


def pixel(x, y):
    """Colour at (x, y) in a 1x1 unit square (y down)."""
    r = 0.18  # rounded-corner radius
    cx = min(max(x, r), 1 - r)
    cy = min(max(y, r), 1 - r)
    if (x - cx) ** 2 + (y - cy) ** 2 > r * r:
        return (0, 0, 0, 0)
    bars = [(0.20, 0.34, 0.58), (0.42, 0.56, 0.42), (0.64, 0.78, 0.26)]
    for i, (x0, x1, top) in enumerate(bars):
        if x0 <= x <= x1 and top <= y <= 0.80:
            return ACCENT if i == 2 else FG
    if 0.14 <= x <= 0.86 and 0.80 < y <= 0.84:
        return FG
    return BG


def png(size):
    rows = []
    for j in range(size):
        row = bytearray([0])
        for i in range(size):
            row.extend(pixel((i + 0.5) / size, (j + 0.5) / size))
        rows.append(bytes(row))
    raw = b"".join(rows)

    def chunk(kind, data):
        c = struct.pack(">I", len(data)) + kind + data
        return c + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)

    ihdr = struct.pack(">IIBBBBB", size, size, 8, 6, 0, 0, 0)
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(raw, 9)) + chunk(b"IEND", b"")


SVG = """<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 100 100" width="64" height="64">
<rect x="0" y="0" width="100" height="100" rx="18" fill="#1f5f9e"/>
<rect x="20" y="58" width="14" height="22" fill="#ffffff"/>
<rect x="42" y="42" width="14" height="38" fill="#ffffff"/>
<rect x="64" y="26" width="14" height="54" fill="#d97a1e"/>
<rect x="14" y="80" width="72" height="4" fill="#ffffff"/>
</svg>
"""

if __name__ == "__main__":
    for s in (32, 64):
        with open(f"partita/logo-{s}x{s}.png", "wb") as f:
            f.write(png(s))
    with open("partita/logo-svg.svg", "w") as f:
        f.write(SVG)
