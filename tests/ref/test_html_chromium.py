"""The review page rendered by a real browser engine (headless Chromium).

Scores a 1-hour synthetic night with --html, renders the page offline to a
PNG, and checks that something was drawn: the PNG decodes (PNG specification,
W3C/ISO 15948: IHDR, IDAT with zlib, per-row filters 0-4), has the requested
size, and holds many distinct colours with a good share of non-background
pixels. A blank, unstyled or failed render fails these checks. Exits 77
(skipped) when /usr/bin/chromium is not installed (scripts/install-deps
--tests installs it).
"""
import os
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

from chromium import CHROMIUM
import chromium
WIDTH, HEIGHT = 1200, 3000


def paeth(a, b, c):
    p = a + b - c
    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
    if pa <= pb and pa <= pc:
        return a
    return b if pb <= pc else c


def decode_png(path):
    """Width, height and the rows of an 8-bit RGB or RGBA PNG, as bytes."""
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, ihdr = 8, b"", None
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + length]
        if kind == b"IHDR":
            ihdr = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat += body
        pos += 12 + length
    width, height, depth, colour, _, _, interlace = ihdr
    assert depth == 8 and colour in (2, 6) and interlace == 0, ihdr
    bpp = 3 if colour == 2 else 4
    raw = zlib.decompress(idat)
    stride = width * bpp
    rows, prev = [], bytearray(stride)
    for y in range(height):
        f = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b = prev[i]
            c = prev[i - bpp] if i >= bpp else 0
            if f == 1:
                line[i] = (line[i] + a) & 255
            elif f == 2:
                line[i] = (line[i] + b) & 255
            elif f == 3:
                line[i] = (line[i] + (a + b) // 2) & 255
            elif f == 4:
                line[i] = (line[i] + paeth(a, b, c)) & 255
        rows.append(bytes(line))
        prev = line
    return width, height, bpp, rows


def main():
    if not os.path.exists(CHROMIUM):
        print("SKIP: %s not installed (apt-get install chromium, or scripts/install-deps --tests)"
              % CHROMIUM)
        return 77
    binary = os.environ["REMTONE_BIN"]
    tmp = tempfile.mkdtemp(prefix="html_render.", dir=os.environ.get("REMTONE_TMP"))
    profile = tempfile.mkdtemp(prefix="chromium.")
    try:
        subprocess.run([binary, "synth", "--profile", "rbd", "--hours", "1", "--seed", "7",
                        "--out", tmp], check=True, stdout=subprocess.DEVNULL)
        page = os.path.join(tmp, "report.html")
        subprocess.run([binary, "score", os.path.join(tmp, "night.edf"), "--stages",
                        os.path.join(tmp, "stages.csv"), "--html", page, "--quiet"], check=True)
        png = os.path.join(tmp, "report.png")
        chromium.run(profile, "--screenshot=" + png, "--window-size=%d,%d" % (WIDTH, HEIGHT),
                     "file://" + page)
        width, height, bpp, rows = decode_png(png)
        assert (width, height) == (WIDTH, HEIGHT), (width, height)
        colours, counts = set(), {}
        for row in rows[::4]:
            for x in range(0, width * bpp, 4 * bpp):
                px = row[x:x + 3]
                colours.add(px)
                counts[px] = counts.get(px, 0) + 1
        total = sum(counts.values())
        background = max(counts.values()) / total
        print("PNG %dx%d, %d distinct colours sampled, most common colour %.1f %%"
              % (width, height, len(colours), 100 * background))
        # A blank page is one colour; an unstyled text page a few greys. The
        # page draws coloured bars, strips and traces: many colours, and the
        # page background covers well under 90 % of it.
        assert len(colours) >= 50, "too few colours: blank or unstyled render"
        assert background < 0.9, "page is nearly all one colour"
        # the review-level badge and the abnormal bars are red (#a8322d): an
        # RBD night must show some
        assert any(abs(c[0] - 0xa8) < 8 and abs(c[1] - 0x32) < 8 and abs(c[2] - 0x2d) < 8
                   for c in colours), "no review-red drawn"
    finally:
        shutil.rmtree(profile, ignore_errors=True)
    shutil.rmtree(tmp, ignore_errors=True)  # kept only when a check failed
    print("ok")
    return 0


if __name__ == "__main__":
    sys.exit(main())
