#!/usr/bin/env python3
"""Renders report.html in headless Chromium: the demo report and a report of a
tiny survey whose names are markup.

Checks that the page's own script ran without error (it marks <html> with
data-report-ready and records errors in data-report-error), that the browser
logged no console message, that the key sections and one bar per region are
in the rendered DOM, that hostile names show as text and inject nothing, and
that a screenshot of the page is a real, non-blank image.

Then lays out the demo report and the report of a sensitivity run on the demo
at 1,400 px and at phone width (390 px) and measures them from inside the page
(report_layout_check.js): no two text labels of a chart overlap, histogram
labels sit on bar edges, every kind of mark a chart draws is in its legend,
every method of the method-spread chart has a look of its own and none hides
another, nothing is wider than the window, and at 1,400 px no table needs to
scroll sideways.

Usage: report_browser_test.py PARITAS_CLI SOURCE_DIR
Standard library only. The screenshot is kept at $PARITAS_REPORT_SCREENSHOT
when that is set (for a person to look at), else in the temporary folder.
"""
import csv
import html
import json
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

CHROMIUM = "/usr/bin/chromium"
HOSTILE_REGION = "<script>alert(1)</script>"
HOSTILE_HEADING = "<img src=x onerror=alert(2)>"
HOSTILE_NAME = "\"><svg onload=alert(3)>"
SECTIONS = ["overview", "price-levels", "aggregates", "matrix", "coverage", "spread", "methods", "cautions"]

failures = []


def check(condition, message):
    if not condition:
        failures.append(message)
        print("FAIL: " + message)


def run_compute(cli, config, output):
    proc = subprocess.run([cli, "compute", config, "--output", output], capture_output=True, text=True,
                          timeout=120)
    if proc.returncode != 0:
        raise SystemExit("paritas compute %s failed (%d): %s" % (config, proc.returncode, proc.stderr))
    return os.path.join(output, "report.html")


def chromium(args, work):
    # A fresh profile per call; everything that might reach the network is off.
    profile = tempfile.mkdtemp(prefix="profile_", dir=work)
    command = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync",
               "--disable-dev-shm-usage", "--hide-scrollbars", "--user-data-dir=" + profile,
               "--enable-logging=stderr", "--v=0"] + args
    proc = subprocess.run(command, capture_output=True, text=True, timeout=60)
    return proc


def console_lines(stderr):
    # Chromium logs page console messages and uncaught exceptions as
    # ":CONSOLE(line)] ..." lines; the page itself logs nothing.
    return [line for line in stderr.splitlines() if ":CONSOLE(" in line or "Uncaught" in line]


def png_size_and_variety(path):
    with open(path, "rb") as f:
        data = f.read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        return None
    width, height = struct.unpack(">II", data[16:24])
    idat = b""
    at = 8
    while at < len(data):
        length, kind = struct.unpack(">I4s", data[at:at + 8])
        if kind == b"IDAT":
            idat += data[at + 8:at + 8 + length]
        at += 12 + length
    raw = zlib.decompress(idat)
    # Distinct byte values of the pixel data: a blank page gives a handful.
    return width, height, len(set(raw[:2_000_000]))


def render(report, work, name, screenshot=None):
    url = "file://" + report
    dump = chromium(["--dump-dom", url], work)
    check(dump.returncode == 0, "%s: chromium --dump-dom exited %d: %s" % (name, dump.returncode, dump.stderr[-500:]))
    dom = dump.stdout
    check(re.search(r'<html[^>]*data-report-ready="1"', dom) is not None,
          "%s: the page's script did not mark the page ready" % name)
    error = re.search(r'data-report-error="([^"]*)"', dom)
    check(error is None, "%s: script error: %s" % (name, error.group(1) if error else ""))
    lines = console_lines(dump.stderr)
    check(not lines, "%s: console messages: %s" % (name, lines[:5]))
    if screenshot:
        shot = chromium(["--screenshot=" + screenshot, "--window-size=1280,4000", url], work)
        check(shot.returncode == 0 and os.path.exists(screenshot), "%s: no screenshot" % name)
        lines = console_lines(shot.stderr)
        check(not lines, "%s: console messages while taking the screenshot: %s" % (name, lines[:5]))
        info = png_size_and_variety(screenshot) if os.path.exists(screenshot) else None
        check(info is not None and info[0] == 1280 and info[1] == 4000,
              "%s: screenshot is not a 1280 x 4000 PNG: %s" % (name, info))
        check(info is not None and info[2] > 40, "%s: screenshot looks blank: %s" % (name, info))
    return dom


LAYOUT_SCRIPT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "report_layout_check.js")
# Chromium's smallest window is 500 px wide: narrower layouts are measured in
# a frame of that width.
MIN_WINDOW_WIDTH = 500


def layout_findings(report, work, name, width):
    """The findings of report_layout_check.js on `report` laid out `width` px wide."""
    with open(report, encoding="utf-8") as f:
        page = f.read()
    with open(LAYOUT_SCRIPT, encoding="utf-8") as f:
        script = f.read()
    at = page.rindex("</body>")
    page = page[:at] + "<script>" + script + "</script>" + page[at:]
    if width < MIN_WINDOW_WIDTH:
        # srcdoc keeps the frame in the page's origin, so its script can
        # write its findings on the outer page, which --dump-dom prints.
        page = ('<!DOCTYPE html><html><body style="margin:0"><iframe style="width:%dpx;height:3000px;'
                'border:0" srcdoc="%s"></iframe></body></html>' % (width, html.escape(page, quote=True)))
    path = os.path.join(work, "%s_layout_%d.html" % (name, width))
    with open(path, "w", encoding="utf-8") as f:
        f.write(page)
    dump = chromium(["--dump-dom", "--window-size=%d,2000" % max(width, MIN_WINDOW_WIDTH), "file://" + path],
                    work)
    found = re.search(r'<html[^>]*data-layout-check="([^"]*)"', dump.stdout)
    if found is None:
        check(False, "%s at %d px: the layout check did not run: %s" % (name, width, dump.stderr[-500:]))
        return None
    return json.loads(html.unescape(found.group(1)))


def check_layout(report, work, name, has_method_spread):
    for width in (1400, 390):
        found = layout_findings(report, work, name, width)
        if found is None:
            continue
        where = "%s at %d px" % (name, width)
        check(found["width"] == width, "%s: laid out %d px wide" % (where, found["width"]))
        check(found["texts"] > 300, "%s: only %d text labels measured" % (where, found["texts"]))
        for kind in ("overlaps", "ticks", "marks", "legend", "overflow"):
            check(not found[kind], "%s: %s: %s" % (where, kind, found[kind][:8]))
        if width >= 1400:
            check(not found["scrolls"], "%s: tables wider than the page: %s" % (where, found["scrolls"]))
        if has_method_spread:
            check(found["marks_checked"] > 0, "%s: no method-spread marks measured" % where)


def run_sensitivity(cli, config, output):
    proc = subprocess.run([cli, "sensitivity", config, "--output", output, "--replicates", "40",
                           "--repetitions", "3", "--seed", "1"], capture_output=True, text=True, timeout=300)
    if proc.returncode != 0:
        raise SystemExit("paritas sensitivity %s failed (%d): %s" % (config, proc.returncode, proc.stderr))
    return os.path.join(output, "sensitivity", "report.html")


def regions_with_parity(output):
    # Root rows of parities.csv (the first node listed) that have a parity.
    with open(os.path.join(output, "parities.csv"), newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    root = rows[0]["node"]
    return sum(1 for r in rows if r["node"] == root and r["parity"] != "")


def write_hostile_survey(folder):
    regions = [HOSTILE_REGION, "r2", "r3"]
    headings = [HOSTILE_HEADING, "plain"]
    items = [("i1", headings[0]), ("i2", headings[0]), ("i3", headings[1]), ("i4", headings[1])]

    def write(name, header, rows):
        with open(os.path.join(folder, name), "w", newline="", encoding="utf-8") as f:
            w = csv.writer(f)
            w.writerow(header)
            w.writerows(rows)

    write("regions.csv", ["region", "name", "population"],
          [(regions[0], "", 1000), ("r2", HOSTILE_NAME, 2000), ("r3", "Third & last", 3000)])
    write("items.csv", ["item", "heading", "description", "unit"], [(i, h, "item " + i, "piece") for i, h in items])
    prices = []
    for r_index, region in enumerate(regions):
        for i_index, (item, _) in enumerate(items):
            for quote in range(2):
                prices.append((region, item, "%.2f" % ((1.0 + 0.1 * r_index) * (2.0 + i_index) * (1 + 0.01 * quote))))
    write("prices.csv", ["region", "item", "price"], prices)
    write("expenditure.csv", ["region", "heading", "expenditure"],
          [(region, heading, 1000 * (1 + k)) for region in regions for k, heading in enumerate(headings)])
    with open(os.path.join(folder, "config.yaml"), "w", encoding="utf-8") as f:
        f.write("survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n  regions: regions.csv\n"
                "  items: items.csv\noutput: out\n")
    return os.path.join(folder, "config.yaml")


def main():
    if len(sys.argv) != 3:
        raise SystemExit(__doc__)
    cli, source = sys.argv[1], sys.argv[2]
    if not os.access(CHROMIUM, os.X_OK):
        raise SystemExit("%s not found: run scripts/setup, which installs Debian's chromium" % CHROMIUM)
    work = tempfile.mkdtemp(prefix="paritas_report_browser_")
    try:
        # The demo report.
        demo_out = os.path.join(work, "demo")
        report = run_compute(cli, os.path.join(source, "config", "demo.yaml"), demo_out)
        screenshot = os.environ.get("PARITAS_REPORT_SCREENSHOT") or os.path.join(work, "demo.png")
        dom = render(report, work, "demo", screenshot)
        for section in SECTIONS:
            check(re.search(r'<section id="%s"' % section, dom) is not None, "demo: section #%s missing" % section)
        num_bars = len(re.findall(r'<rect class="pl-bar"', dom))
        expected = regions_with_parity(demo_out)
        check(expected == 16, "demo: parities.csv has %d root parities, expected 16" % expected)
        check(num_bars == expected, "demo: %d price-level bars for %d regions" % (num_bars, expected))
        num_rows = len(re.findall(r"<tr>", dom.split('id="price-level-table"', 1)[-1].split("<tbody>", 1)[-1].split("</tbody>", 1)[0]))
        check(num_rows == expected, "demo: price-level table has %d rows for %d regions" % (num_rows, expected))
        check(len(re.findall(r"<script", dom)) == 1, "demo: expected exactly one script element")
        check(re.search(r'(src|href)="(https?:)?//', dom) is None, "demo: refers to an outside resource")
        check_layout(report, work, "demo", has_method_spread=False)

        # The report of a sensitivity run: intervals, coverage curve and the
        # method-spread chart of every method pair.
        sensitivity_report = run_sensitivity(cli, os.path.join(source, "config", "demo.yaml"), demo_out)
        render(sensitivity_report, work, "sensitivity")
        check_layout(sensitivity_report, work, "sensitivity", has_method_spread=True)

        # A survey whose region code, region name and heading are markup.
        hostile_dir = os.path.join(work, "hostile")
        os.makedirs(hostile_dir)
        hostile_out = os.path.join(hostile_dir, "out")
        report = run_compute(cli, write_hostile_survey(hostile_dir), hostile_out)
        dom = render(report, work, "hostile")
        check(len(re.findall(r"<script", dom)) == 1, "hostile: a <script> from the data reached the DOM")
        check("<img" not in dom, "hostile: an <img> from the data reached the DOM")
        check("<svg onload" not in dom, "hostile: an attribute-breaking name reached the DOM")
        check(re.search(r"<[^>]*\son(error|load)=", dom) is None, "hostile: an event handler attribute in the DOM")
        check("&lt;script&gt;alert(1)&lt;/script&gt;" in dom, "hostile: region code not shown as text")
        check("&lt;img src=x onerror=alert(2)&gt;" in dom, "hostile: heading not shown as text")
        check("Third &amp; last" in dom, "hostile: ampersand in a name not shown as text")
        num_bars = len(re.findall(r'<rect class="pl-bar"', dom))
        check(num_bars == 3, "hostile: %d price-level bars for 3 regions" % num_bars)
    finally:
        if not failures:
            shutil.rmtree(work, ignore_errors=True)
        else:
            print("files kept in " + work)
    if failures:
        print("report browser checks: %d failed" % len(failures))
        return 1
    print("report browser checks: all passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
