#!/usr/bin/python3
"""The HTML report in a real browser: headless Chromium (Debian chromium)
takes a PNG screenshot of the demo calibration's report and prints it to
PDF on Letter paper (the browser's default) and on A4 (a test-side copy
with an @page size rule); poppler's pdfinfo and pdftotext (Debian
poppler-utils) read the PDFs back, Debian python3-pil the PNG.

Checks: the page count of each PDF within the expected range; the PNG not
blank (dark and coloured pixels present); no chart cut across a page (each
chart's title and its figure caption on the same page); no chart
overflowing its box: every element of every SVG, text at its estimated
width, inside the viewBox (from the file), and in the browser's own layout
(a test-side copy with a script that writes the boxes of every drawn
element into the page, read back with --dump-dom) every element inside its
chart's box and every chart inside the text column, at a wide and a narrow
window.

Usage: html_browser.py SRC TWISTFIT. Exit 77 (skipped) without chromium,
pdfinfo or PIL."""
import os
import re
import shutil
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET

SVG = "{http://www.w3.org/2000/svg}"
XHTML = "{http://www.w3.org/1999/xhtml}"
CHAR_EM = 0.62  # src/cli/svgchart.h SVGC_CHAR_EM: the estimate the charts are laid out with

failures = []


def fail(msg):
    failures.append(msg)
    print("FAIL: " + msg)


def browser():
    for name in ("chromium", "chromium-browser"):
        p = shutil.which(name)
        if p:
            return p
    return None


def run_chromium(exe, args, url, tmp):
    # a profile of its own in the scratch folder: nothing shared with other runs
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
           "--no-first-run", "--user-data-dir=" + os.path.join(tmp, "profile")] + args + [url]
    r = subprocess.run(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, timeout=240)
    if r.returncode != 0:
        fail("chromium %s: status %d: %s" % (" ".join(args), r.returncode, r.stderr.decode()[-400:]))
    return r.returncode == 0


def pdf_pages(path):
    out = subprocess.run(["pdfinfo", path], stdout=subprocess.PIPE, check=True).stdout.decode()
    pages = int(re.search(r"^Pages:\s+(\d+)", out, re.M).group(1))
    size = re.search(r"^Page size:\s+([\d.]+) x ([\d.]+)", out, re.M)
    return pages, (float(size.group(1)), float(size.group(2)))


def page_texts(path, pages):
    texts = []
    for p in range(1, pages + 1):
        t = subprocess.run(["pdftotext", "-f", str(p), "-l", str(p), "-layout", path, "-"],
                           stdout=subprocess.PIPE, check=True).stdout.decode()
        texts.append(" ".join(t.split()))
    return texts


def num(e, name, default=0.0):
    v = e.get(name)
    return float(v) if v is not None else default


def svg_extent_failures(svg):
    """Elements of one chart outside its viewBox (text at its estimated width)."""
    x0, y0, w, h = (float(v) for v in svg.get("viewBox").split())
    bad = []

    def inside(what, x, y):
        if x < x0 - 0.01 or y < y0 - 0.01 or x > x0 + w + 0.01 or y > y0 + h + 0.01:
            bad.append("%s at %.1f %.1f outside the viewBox %s" % (what, x, y, svg.get("viewBox")))

    for e in svg.iter():
        tag = e.tag.replace(SVG, "")
        if tag == "rect":
            inside("rect", num(e, "x"), num(e, "y"))
            inside("rect", num(e, "x") + num(e, "width"), num(e, "y") + num(e, "height"))
        elif tag == "line":
            inside("line", num(e, "x1"), num(e, "y1"))
            inside("line", num(e, "x2"), num(e, "y2"))
        elif tag == "circle":
            r = num(e, "r")
            inside("circle", num(e, "cx") - r, num(e, "cy") - r)
            inside("circle", num(e, "cx") + r, num(e, "cy") + r)
        elif tag == "path":
            for cmd, args in re.findall(r"([MLHVZ])([^MLHVZ]*)", e.get("d")):
                v = [float(a) for a in args.split()]
                if cmd in "ML":
                    x, y = v
                elif cmd == "H":
                    x = v[0]
                elif cmd == "V":
                    y = v[0]
                else:
                    continue
                inside("path", x, y)
        elif tag == "text":
            px = num(e, "font-size", 11)
            width = len("".join(e.itertext())) * px * CHAR_EM
            x, y = num(e, "x"), num(e, "y")
            anchor = e.get("text-anchor", "start")
            a = x - width / 2 if anchor == "middle" else x - width if anchor == "end" else x
            tr = e.get("transform")
            if tr:
                m = re.match(r"rotate\(-90 ([-\d.]+) ([-\d.]+)\)", tr)
                cx, cy = float(m.group(1)), float(m.group(2))
                inside("rotated text", cx - 0.8 * px, cy - (a - cx))
                inside("rotated text", cx + 0.25 * px, cy - (a + width - cx))
            else:
                inside("text '%s'" % "".join(e.itertext()), a, y - 0.8 * px)
                inside("text '%s'" % "".join(e.itertext()), a + width, y + 0.25 * px)
    return bad


# Injected into a test-side copy of the report (the report itself has no
# scripts): the browser's own boxes of every drawn element of every chart,
# after layout with the real fonts, against the chart's box, and each
# chart's box against the page's text column. The result is written into
# the page, which --dump-dom prints.
LAYOUT_SCRIPT = """<script>
(function () {
  var out = [], body = document.body.getBoundingClientRect();
  var charts = document.querySelectorAll('svg.chart');
  for (var i = 0; i < charts.length; i++) {
    var s = charts[i], r = s.getBoundingClientRect(), name = s.getAttribute('aria-label');
    if (r.left < body.left - 0.5 || r.right > body.right + 0.5)
      out.push('chart ' + name + ': ' + r.left + '..' + r.right + ' beyond the column ' + body.left + '..' + body.right);
    var els = s.querySelectorAll('text, rect, line, path, circle');
    for (var k = 0; k < els.length; k++) {
      var b = els[k].getBoundingClientRect(), tol = 0.75;
      if (b.width === 0 && b.height === 0) continue;
      if (b.left < r.left - tol || b.right > r.right + tol || b.top < r.top - tol || b.bottom > r.bottom + tol)
        out.push('chart ' + name + ': ' + els[k].tagName + ' "' + (els[k].textContent || '') + '" at ' +
                 [b.left, b.top, b.right, b.bottom].join(' ') + ' outside ' + [r.left, r.top, r.right, r.bottom].join(' '));
    }
  }
  var pre = document.createElement('pre');
  pre.id = 'layout-check';
  pre.textContent = 'charts ' + charts.length + '\\n' + (out.length ? out.join('\\n') : 'inside');
  document.body.appendChild(pre);
})();
</script>"""


def layout_check(exe, text, tmp, width):
    """The browser's boxes: returns the lines the injected script wrote."""
    page = os.path.join(tmp, "layout-%d.html" % width)
    with open(page, "w", encoding="utf-8") as f:
        f.write(text.replace("</body>", LAYOUT_SCRIPT + "\n</body>", 1))
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars", "--no-first-run",
           "--user-data-dir=" + os.path.join(tmp, "profile"), "--window-size=%d,1200" % width,
           "--dump-dom", "file://" + page]
    r = subprocess.run(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, timeout=240)
    m = re.search(r'<pre id="layout-check">(.*?)</pre>', r.stdout.decode(), re.S)
    if m is None:
        fail("window %d: the layout check did not run (status %d)" % (width, r.returncode))
        return None
    return m.group(1).split("\n")


def main():
    src, twistfit = sys.argv[1], sys.argv[2]
    exe = browser()
    if exe is None or shutil.which("pdfinfo") is None or shutil.which("pdftotext") is None:
        print("SKIP: chromium or poppler-utils not installed")
        return 77
    try:
        from PIL import Image
    except ImportError:
        print("SKIP: python3-pil not installed")
        return 77
    tmp = tempfile.mkdtemp()
    try:
        html = os.path.join(tmp, "report.html")
        subprocess.run([twistfit, "calibrate", os.path.join(src, "samples/tf6s.ini"),
                        os.path.join(src, "samples/demo-campaign.csv"), "--html", html],
                       stdout=subprocess.DEVNULL, check=True)
        doc = ET.parse(html)
        svgs = list(doc.iter(SVG + "svg"))
        if len(svgs) < 10:
            fail("only %d charts in the demo report" % len(svgs))
        for s in svgs:
            for b in svg_extent_failures(s):
                fail("chart '%s': %s" % (s.get("aria-label"), b))
        css = "".join(doc.find(".//" + XHTML + "style").itertext())
        if "svg.chart{display:block;max-width:100%" not in css:
            fail("the charts are not held to the width of the page")

        # the browser's own layout, at a desktop width and a narrow one
        # (the charts scale down with the column)
        with open(html, encoding="utf-8") as f:
            text = f.read()
        for width in (820, 420):
            lines = layout_check(exe, text, tmp, width)
            if lines is None:
                continue
            if lines[0] != "charts %d" % len(svgs):
                fail("window %d: the layout check saw %s, expected %d charts" % (width, lines[0], len(svgs)))
            for line in lines[1:]:
                if line != "inside":
                    fail("window %d: %s" % (width, line))

        # screenshot of the first screen
        png = os.path.join(tmp, "shot.png")
        if run_chromium(exe, ["--screenshot=" + png, "--window-size=820,1160"], "file://" + html, tmp):
            im = Image.open(png).convert("RGB")
            px = list(im.getdata())
            dark = sum(1 for r, g, b in px if r + g + b < 300)
            coloured = sum(1 for r, g, b in px if max(r, g, b) - min(r, g, b) > 60)
            if dark < 0.005 * len(px):
                fail("the screenshot is blank: %d dark pixels of %d" % (dark, len(px)))
            if coloured < 50:
                fail("the screenshot has no coloured pixels (%d)" % coloured)

        # PDF, Letter (the browser's default) and A4
        a4 = os.path.join(tmp, "report-a4.html")
        with open(a4, "w", encoding="utf-8") as f:
            f.write(text.replace("<style>", "<style>@page{size:A4}", 1))
        titles = [s.get("aria-label") for s in svgs]
        for name, page, want in (("letter", html, (612, 792)), ("a4", a4, (595, 842))):
            pdf = os.path.join(tmp, name + ".pdf")
            if not run_chromium(exe, ["--no-pdf-header-footer", "--print-to-pdf=" + pdf], "file://" + page, tmp):
                continue
            pages, size = pdf_pages(pdf)
            print("%s: %d pages of %.0f x %.0f pt" % (name, pages, size[0], size[1]))
            if abs(size[0] - want[0]) > 2 or abs(size[1] - want[1]) > 2:
                fail("%s: page size %s, expected %s" % (name, size, want))
            # 8 sections, each from a new page; the measurement table and the
            # correlation table take a few pages more
            if not 10 <= pages <= 30:
                fail("%s: %d pages, expected 10 to 30" % (name, pages))
            texts = page_texts(pdf, pages)
            for k, title in enumerate(titles):
                # the caption of chart k is "Figure k+1."; the chart's title
                # (cut to its first words, as the chart may shorten it) must be
                # on the same page
                cap = "Figure %d." % (k + 1)
                head = " ".join(title.split()[:3])
                on = [i for i, t in enumerate(texts) if cap in t]
                if len(on) != 1:
                    fail("%s: caption '%s' found on pages %s" % (name, cap, on))
                    continue
                if head not in texts[on[0]]:
                    fail("%s: chart '%s' is not on the page of its caption (page %d)" % (name, title, on[0] + 1))
    finally:
        shutil.rmtree(tmp)
    if failures:
        return 1
    print("PASS: the demo report renders, prints to Letter and A4, and no chart leaves its box or its page")
    return 0


if __name__ == "__main__":
    sys.exit(main())
