#!/usr/bin/env python3
"""Checks a screenshot of a whorl HTML report: the page is not blank, and the overlay plots
are there and drawn. Standard library only: a small PNG decoder over zlib, and pixel tests
done a whole row at a time with byte translation tables and integer bit masks.

usage: check-screenshot.py REPORT.html SCREENSHOT.png MAX_PLOTS
"""
import re
import struct
import sys
import zlib


def add_bytes(x, y):
    """Bytewise (x + y) mod 256 of two equal-length byte strings, without a Python loop."""
    n = len(x)
    a, b = int.from_bytes(x, "big"), int.from_bytes(y, "big")
    low, high = int.from_bytes(b"\x7f" * n, "big"), int.from_bytes(b"\x80" * n, "big")
    return (((a & low) + (b & low)) ^ ((a ^ b) & high)).to_bytes(n, "big")


def decode_png(path):
    """Returns (width, height, rows), each row the RGB bytes of one line; 8-bit RGB/RGBA only."""
    data = open(path, "rb").read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError(f"{path} is not a PNG file")
    pos, idat, header = 8, b"", None
    while pos < len(data):
        (length,) = struct.unpack(">I", data[pos : pos + 4])
        kind = data[pos + 4 : pos + 8]
        body = data[pos + 8 : pos + 8 + length]
        pos += 12 + length
        if kind == b"IHDR":
            header = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat += body
        elif kind == b"IEND":
            break
    width, height, depth, colour, _, _, interlace = header
    if depth != 8 or colour not in (2, 6) or interlace != 0:
        raise ValueError(f"{path}: unsupported PNG (depth {depth}, colour type {colour})")
    bpp = 3 if colour == 2 else 4
    raw = zlib.decompress(idat)
    stride = width * bpp
    rows, prev = [], bytes(stride)
    for y in range(height):
        start = y * (stride + 1)
        f = raw[start]
        line = raw[start + 1 : start + 1 + stride]
        if f == 2:
            line = add_bytes(line, prev)
        elif f != 0:
            out = bytearray(line)
            for x in range(stride):
                a = out[x - bpp] if x >= bpp else 0
                b = prev[x]
                if f == 1:
                    out[x] = (out[x] + a) & 0xFF
                elif f == 3:
                    out[x] = (out[x] + (a + b) // 2) & 0xFF
                else:
                    c = prev[x - bpp] if x >= bpp else 0
                    p = a + b - c
                    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                    pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
                    out[x] = (out[x] + pred) & 0xFF
            line = bytes(out)
        prev = line
        if bpp == 4:
            rgb = bytearray(width * 3)
            for ch in range(3):
                rgb[ch::3] = line[ch::4]
            line = bytes(rgb)
        rows.append(line)
    return width, height, rows


def table(lo, hi):
    return bytes(1 if lo <= v <= hi else 0 for v in range(256))


def colour(rgb, tol):
    """Translation tables for 'within tol of rgb' per channel."""
    return [table(max(0, c - tol), min(255, c + tol)) for c in rgb]


def mask(row, tables, x0=0, x1=None):
    """An int with one byte per pixel of row[x0:x1]: 1 where every channel is in range."""
    m = -1
    for ch, t in enumerate(tables):
        m &= int.from_bytes(row[ch::3][x0:x1].translate(t), "big")
    return m


RULE = colour((0xD0, 0xD0, 0xD0), 8)  # the border of each plot (--rule in the page's style)
WHITE = colour((255, 255, 255), 0)
DARK = [table(0, 89)] * 3  # near-black: the unknown, axes and text
REFERENCE = [colour((0xC4, 0xE5, 0xF7), 22), colour((0x00, 0x72, 0xB2), 40)]  # pale fill, blue


def plot_boxes(width, rows):
    """Rectangles drawn in the rule colour: long horizontal runs joined by a vertical edge."""
    runs = []
    for y, row in enumerate(rows):
        bits = mask(row, RULE).to_bytes(width, "big")
        best = max((m.span() for m in re.finditer(rb"\x01{600,}", bits)), default=None,
                   key=lambda s: s[1] - s[0])
        if best:
            runs.append((y, best[0], best[1] - 1))
    boxes, i = [], 0
    while i < len(runs):
        y1, a1, b1 = runs[i]
        for j in range(i + 1, len(runs)):
            y2, a2, b2 = runs[j]
            if abs(a1 - a2) <= 2 and abs(b1 - b2) <= 2 and y2 - y1 > 100:
                edge = sum(mask(rows[y], RULE, a1, a1 + 1) for y in range(y1, y2))
                if edge >= 0.95 * (y2 - y1):
                    boxes.append((a1, y1, b1, y2))
                    i = j
                    break
        i += 1
    return boxes


def main():
    html_path, png_path, most = sys.argv[1], sys.argv[2], int(sys.argv[3])
    html = open(html_path, encoding="utf-8").read()
    hits = len(re.findall(r"<tr(?: class=\"first\")?><td class=\"num\">", html))
    svgs = html.count("<svg")
    problems = []
    if svgs != min(most, hits) or svgs == 0:
        problems.append(f"{svgs} <svg> plots for {hits} hits (expected {min(most, hits)})")
    if "<script" in html:
        problems.append("the report contains a <script> element")

    width, height, rows = decode_png(png_path)
    white = sum(mask(row, WHITE).bit_count() for row in rows)
    inked = width * height - white
    if inked < 0.02 * width * height:
        problems.append(f"the page looks blank ({inked} non-white pixels)")
    boxes = plot_boxes(width, rows)
    if not boxes:
        problems.append("no plot is visible in the screenshot")
    for n, (x0, y0, x1, y1) in enumerate(boxes, 1):
        dark = ref = 0
        for y in range(y0 + 2, y1 - 1):
            dark += mask(rows[y], DARK, x0 + 2, x1 - 1).bit_count()
            ref += (mask(rows[y], REFERENCE[0], x0 + 2, x1 - 1)
                    | mask(rows[y], REFERENCE[1], x0 + 2, x1 - 1)).bit_count()
        if dark < 1500 or ref < 150:
            problems.append(f"plot {n} at y {y0}..{y1} looks empty ({dark} dark, {ref} reference pixels)")
    name = html_path.rsplit("/", 1)[-1]
    if problems:
        for p in problems:
            print(f"FAIL {name}: {p}")
        return 1
    print(f"ok   {name}: {svgs} plots in the report, {len(boxes)} drawn in view, "
          f"{inked * 100 // (width * height)} % of the page inked")
    return 0


if __name__ == "__main__":
    sys.exit(main())
