#!/usr/bin/env python3
"""Opens a `limpet review` page in headless Chromium and checks what a reviewer would see.

usage: check.py REVIEW.html SCENARIO_COUNT SCREENSHOT.png

Checks: the page loads without console errors or failed requests, the rendered DOM holds the
mode graph, the reaction matrix and one plot per scenario, and a 1200x2000 screenshot is a
real picture (a PNG of some size whose pixels are not all one colour). Standard library only.
"""

import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib


def chromium():
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    sys.exit("browser check: no chromium on PATH (install it: apt-get install -y chromium)")


def run(args, timeout=120):
    profile = tempfile.mkdtemp(prefix="limpet-browser-")
    base = [
        chromium(),
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--hide-scrollbars",
        "--user-data-dir=" + profile,
    ]
    try:
        return subprocess.run(
            base + args, capture_output=True, text=True, timeout=timeout, check=False
        )
    finally:
        shutil.rmtree(profile, ignore_errors=True)


def png_pixels_vary(path):
    """Decodes the PNG's image data (zlib) and reports whether two scanlines' pixels differ."""
    with open(path, "rb") as f:
        data = f.read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        return False, "not a PNG"
    pos, idat, width, height, bpp = 8, b"", 0, 0, 4
    while pos < len(data):
        (length,) = struct.unpack(">I", data[pos : pos + 4])
        kind = data[pos + 4 : pos + 8]
        body = data[pos + 8 : pos + 8 + length]
        if kind == b"IHDR":
            width, height, depth, colour = struct.unpack(">IIBB", body[:10])
            bpp = {2: 3, 6: 4, 0: 1, 4: 2}.get(colour, 4) * max(depth // 8, 1)
        elif kind == b"IDAT":
            idat += body
        pos += 12 + length
    raw = zlib.decompress(idat)
    stride = width * bpp + 1
    # Unfilter enough to compare pixel values: filter type 0 rows compare directly; for
    # the others, differing filtered bytes across many rows still mean a non-uniform image.
    distinct = set()
    for row in range(0, height, max(height // 200, 1)):
        line = raw[row * stride + 1 : (row + 1) * stride]
        distinct.update(line[i : i + bpp] for i in range(0, len(line), bpp * 7))
        if len(distinct) > 16:
            return True, "%dx%d, many distinct pixel values" % (width, height)
    return False, "%dx%d, only %d distinct values" % (width, height, len(distinct))


def main():
    if len(sys.argv) != 4:
        sys.exit(__doc__)
    page, count, shot = os.path.abspath(sys.argv[1]), int(sys.argv[2]), sys.argv[3]
    url = "file://" + page
    failures = []

    with open(page, encoding="utf-8") as f:
        html = f.read()
    for needle in ('src="http', 'href="http', "<script", "<link", "@import"):
        if needle in html:
            failures.append("the page refers to an outside resource: " + needle)

    # Console messages and failed loads go to stderr with --enable-logging=stderr.
    dom = run(["--enable-logging=stderr", "--v=0", "--dump-dom", url])
    if dom.returncode != 0:
        failures.append("chromium --dump-dom exited %d: %s" % (dom.returncode, dom.stderr[-2000:]))
    console = [
        l
        for l in dom.stderr.splitlines()
        if re.search(r"CONSOLE|Uncaught|net::ERR_|Failed to load", l)
    ]
    if console:
        failures.append("console errors:\n  " + "\n  ".join(console))
    out = dom.stdout
    if not re.search(r'<section id="mode-graph">.*?<svg', out, re.S):
        failures.append("no mode graph (an <svg> in #mode-graph) in the rendered page")
    if not re.search(r'<section id="reaction-matrix">.*?<table class="matrix">', out, re.S):
        failures.append("no reaction matrix table in the rendered page")
    plots = len(re.findall(r'class="figure scenario-plot"><svg', out))
    if plots != count:
        failures.append("%d scenario plots rendered, %d scenarios expected" % (plots, count))
    if "ISO 26262" not in out:
        failures.append("the cautions are missing")

    if os.path.exists(shot):
        os.remove(shot)
    res = run(["--screenshot=" + os.path.abspath(shot), "--window-size=1200,2000", url])
    if not os.path.exists(shot):
        failures.append("no screenshot written: " + res.stderr[-2000:])
    else:
        size = os.path.getsize(shot)
        varied, why = png_pixels_vary(shot)
        if size < 20_000:
            failures.append("screenshot only %d bytes: a blank page?" % size)
        if not varied:
            failures.append("screenshot looks blank: " + why)
        print("browser check: screenshot %s, %d bytes, %s" % (shot, size, why))

    if failures:
        print("browser check FAILED:\n- " + "\n- ".join(failures))
        sys.exit(1)
    print("browser check: page loads, graph, matrix and %d plot(s) present" % plots)


if __name__ == "__main__":
    main()
