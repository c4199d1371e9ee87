#!/usr/bin/python3
"""tests/inspect/report_browser.py - the HTML shift report opened in headless
Chromium (Debian's chromium package).

usage: report_browser.py MODEBAND GEN_SHIFTLOG SCRATCH

Writes logs with reject images, a torn last line, a newer-version line and
a model change; runs `modeband report --html`; then
  * --dump-dom: every <svg> of the file survives parsing (same count in the
    DOM Chromium built), no parser error, no <script> anywhere;
  * the console (--enable-logging=stderr) shows no JavaScript or page error;
  * --screenshot: the page is not blank, and each chart's own colours are
    on screen in quantity (Pareto bars, reject markers, tolerance lines,
    drift shading, defect map), so each kind of SVG really rendered; the
    thumbnails decoded (img elements with natural size in the DOM are not
    visible to --dump-dom, so the grey ring of the reject images is looked
    for in the screenshot).
Exit 77 (skip) only when no Chromium is found.
"""
import glob
import os
import re
import shutil
import subprocess
import sys
import tempfile

import cv2
import numpy as np


def find_chromium():
    for c in ("/usr/bin/chromium", "/usr/bin/chromium-browser", shutil.which("chromium") or ""):
        if c and os.access(c, os.X_OK):
            return c
    return None


def run_chromium(exe, args, url):
    user = tempfile.mkdtemp(prefix="mb_chromium_")
    try:
        cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
               "--no-first-run", "--disable-background-networking",
               "--disable-component-update", "--disable-sync",
               "--user-data-dir=" + user] + args + [url]
        return subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    finally:
        shutil.rmtree(user, ignore_errors=True)


def colour_pixels(img, hex_rgb, tol=18):
    r, g, b = (int(hex_rgb[i:i + 2], 16) for i in (1, 3, 5))
    bgr = np.array([b, g, r], dtype=np.int16)
    d = np.abs(img.astype(np.int16) - bgr).max(axis=2)
    return int(np.sum(d <= tol))


def main():
    modeband, gen, scratch = sys.argv[1:4]
    exe = find_chromium()
    if not exe:
        print("SKIP: Chromium not found (/usr/bin/chromium); install the Debian "
              "package chromium ('make deps' does) to run the browser check")
        sys.exit(77)
    shutil.rmtree(scratch, ignore_errors=True)
    os.makedirs(scratch)
    logs = os.path.join(scratch, "logs")
    subprocess.run([gen, logs, "--shifts", "2", "--parts", "1500", "--seed", "3",
                    "--drift-from", "700", "--drift-per-part", "0.0001",
                    "--images", "8", "--torn", "--newer", "--model-change"], check=True)
    html = os.path.join(scratch, "report.html")
    res = subprocess.run([modeband, "report", "--logs", logs, "--html", html],
                         capture_output=True, text=True)
    fails = []
    if res.returncode != 0:
        print(res.stdout, res.stderr)
        sys.exit(1)
    for said in ("torn", "newer than this reader", "model changed"):
        if said not in res.stdout:
            fails.append("terminal summary does not say '%s'" % said)
    page = open(html, encoding="utf-8").read()
    n_svg = page.count("<svg")
    n_img = page.count("data:image/png;base64,")
    if "<script" in page.lower() or re.search(r"(src|href)\s*=\s*\"?(https?:|//)", page):
        fails.append("the page has a script or an external reference")
    if n_svg < 6:
        fails.append("only %d SVG charts in the page" % n_svg)
    if n_img != 8:
        fails.append("%d embedded thumbnails, expected 8" % n_img)

    url = "file://" + os.path.abspath(html)
    dom = run_chromium(exe, ["--dump-dom"], url)
    if dom.returncode != 0:
        fails.append("chromium --dump-dom failed: %s" % dom.stderr[-500:])
    d = dom.stdout
    if d.count("<svg") != n_svg:
        fails.append("DOM has %d <svg>, the file %d" % (d.count("<svg"), n_svg))
    if "parsererror" in d:
        fails.append("an SVG failed to parse")
    if d.count("<polyline") + d.count("<polygon") < n_svg:
        fails.append("SVG content missing from the DOM")

    shot = os.path.join(scratch, "report.png")
    sres = run_chromium(exe, ["--enable-logging=stderr", "--v=0",
                              "--screenshot=" + shot, "--window-size=1200,5200",
                              "--hide-scrollbars"], url)
    console = [l for l in sres.stderr.splitlines() if "CONSOLE" in l or "Uncaught" in l]
    if console:
        fails.append("console messages: %s" % console[:3])
    img = cv2.imread(shot)
    if img is None:
        fails.append("no screenshot written: %s" % sres.stderr[-500:])
    else:
        if float(img.std()) < 10:
            fails.append("the screenshot is blank")
        checks = {"#4d7a8c": ("Pareto bars", 3000), "#c0392b": ("rejects (per hour, markers)", 2000),
                  "#8e44ad": ("tolerance lines", 1000), "#fbe3bd": ("drift shading", 300),
                  "#d0822a": ("cumulative line", 200), "#2b5d73": ("run-chart lines", 1000)}
        for col, (what, least) in checks.items():
            n = colour_pixels(img, col)
            print("%-28s %s: %d px" % (what, col, n))
            if n < least:
                fails.append("%s (%s) hardly on screen: %d px" % (what, col, n))
        # defect map: its sectors are shaded by count, so many distinct warm
        # colours (r > g > b) appear, each over a sector's area; the other
        # charts use one flat colour each
        b, g, r = (img[..., k].astype(int) for k in range(3))
        warm = (r - b > 40) & (r > g) & (g > b)
        keys, counts = np.unique((r[warm] << 16) | (g[warm] << 8) | b[warm], return_counts=True)
        shades = int(np.sum(counts >= 100))
        print("%-28s %d shades over 100 px" % ("defect map sectors", shades))
        if shades < 5:
            fails.append("defect map hardly on screen (%d shades)" % shades)
        # thumbnails: the dark ring (grey 40) of the generated reject images
        dark = int(np.sum((img.max(axis=2) < 60) & (img.min(axis=2) > 20)))
        print("%-28s %d px" % ("thumbnail rings", dark))
        if dark < 2000:
            fails.append("reject thumbnails not rendered")
    for f in fails:
        print("FAIL:", f)
    if fails:
        sys.exit(1)
    print("chromium rendered %d SVG charts and %d thumbnails; screenshot %s" % (n_svg, n_img, shot))


if __name__ == "__main__":
    main()
