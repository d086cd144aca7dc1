# SPDX-License-Identifier: GPL-3.0-or-later
"""Charts: twofold --svg.

Runs twofold --svg on examples/demo.csv and on a small input built here
with known growth, then checks:
  - the SVG is well-formed XML (xml.etree) with an A4-wide page (210 mm);
  - one group per region (class "region", data-region), the sum over
    regions first, the other regions ordered by the growth rate of the same
    run's --format json records, fastest first;
  - each region has the three panels (counts, P(change), growth), a count
    axis whose labels are 1, 2, 4, 8, ... at equal steps (a log 2 axis:
    each doubling the same height), a zero row, and a right-hand scale of
    doubling and halving times placed at r = ln 2 / T (the handbook formula
    of exponential growth: 14 d sits half as far from zero as 7 d);
  - the heading names the region and says the growth rate and doubling or
    halving time the JSON records give (rounded as the heading rounds);
  - every positive count is a point, every zero count an open mark on the
    zero row, every run of missing days a hatched gap;
  - the small input's regions, built with doubling time 7 days, halving
    time 14 days and no growth (counts rounded from exp(a + r t)), come out
    growing / shrinking / flat in that order, with doubling time about 7
    and halving time about 14 days (construction, handbook formula);
  - same input, same bytes; a failed run leaves no file and an existing
    target untouched (written whole or not at all);
  - the SVG renders to a non-trivial PNG with rsvg-convert (librsvg) and
    with headless Chromium.  Either tool missing is a FAIL (tools/setup
    installs both).
"""
import os as _os
import sys as _sys
if _os.environ.get("TWOFOLD_SANITIZER_BUILD") or _os.environ.get("TWOFOLD_SKIP_BINDINGS"):
    print("*** SKIPPED under sanitizers: %s is slow or loads outside programs;"
          " the normal build runs it ***" % _os.path.basename(__file__))
    _sys.exit(77)

import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET

NS = "{http://www.w3.org/2000/svg}"
LN2 = math.log(2)
MONTHS = {"Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep",
          "Oct", "Nov", "Dec"}

top_srcdir = os.environ.get("top_srcdir", ".")
top_builddir = os.environ.get("top_builddir", ".")
TWOFOLD = os.path.join(top_builddir, "bindings", "cli", "twofold")
DEMO = os.path.join(top_srcdir, "examples", "demo.csv")

failures = []


def check(cond, what):
    if not cond:
        failures.append(what)
        print("FAIL: " + what, file=sys.stderr)
    return cond


def run(args, **kw):
    return subprocess.run([TWOFOLD] + args, capture_output=True, text=True,
                          **kw)


def classes(el):
    return el.get("class", "").split()


def find_class(el, cls):
    return [e for e in el.iter() if cls in classes(e)]


def text_of(el):
    return "".join(el.itertext())


def read_csv(path, column="cases"):
    """{region: {date: count or None}} from a long CSV."""
    import csv
    out = {}
    with open(path, newline="") as f:
        for row in csv.DictReader(f):
            v = row[column]
            out.setdefault(row["region"], {})[row["date"]] = (
                int(v) if v != "" else None)
    return out


def days_text(d):
    """The heading's rounding of a number of days: one decimal below 10,
    whole days above (the chart's own choice; common practice, no source)."""
    return "%.1f" % d if d < 9.95 else "%.0f" % d


def check_svg(svg_path, records, data, label):
    """Structure checks shared by the demo and the small input."""
    try:
        root = ET.parse(svg_path).getroot()
    except ET.ParseError as e:
        check(False, "%s: SVG not well-formed: %s" % (label, e))
        return None
    check(root.tag == NS + "svg", "%s: root is <svg>" % label)
    check(root.get("width") == "210mm", "%s: page 210 mm wide" % label)
    vb = root.get("viewBox", "").split()
    check(len(vb) == 4 and vb[2] == "794", "%s: viewBox 794 px wide" % label)
    # nothing external: no scripts, images, links or web fonts
    for el in root.iter():
        check(el.tag not in (NS + "script", NS + "image", NS + "foreignObject"),
              "%s: no %s" % (label, el.tag))
        for k in el.attrib:
            check("href" not in k, "%s: no links (%s)" % (label, k))
    check(root.get("font-family") == "sans-serif",
          "%s: generic font family" % label)

    groups = find_class(root, "region")
    names = [g.get("data-region") for g in groups]
    check(sorted(names) == sorted(r["region"] for r in records),
          "%s: one group per region: %s" % (label, names))
    check(len(set(g.get("id") for g in groups)) == len(groups),
          "%s: distinct region ids" % label)
    # ordering: the total first, then by JSON growth_rate, fastest first
    total = [r for r in records if r["region"] == "(total)"]
    rest = [r for r in records if r["region"] != "(total)"]
    with_rate = sorted([r for r in rest if r["growth_rate"] is not None],
                       key=lambda r: -r["growth_rate"])
    without = [r for r in rest if r["growth_rate"] is None]
    expected = [r["region"] for r in total + with_rate + without]
    check(names == expected,
          "%s: order %s, expected %s" % (label, names, expected))
    if total:
        check("total" in classes(groups[0]), "%s: first group is the total"
              % label)

    allmax = max((v for reg in data.values() for v in reg.values()
                  if v is not None), default=1)
    by_name = {r["region"]: r for r in records}
    for g in groups:
        name = g.get("data-region")
        rec = by_name.get(name)
        panels = {p: find_class(g, p) for p in
                  ("panel-counts", "panel-change", "panel-growth")}
        for p, found in panels.items():
            check(len(found) == 1, "%s/%s: one %s" % (label, name, p))
        if any(len(v) != 1 for v in panels.values()):
            continue
        pa, pc = panels["panel-counts"][0], panels["panel-growth"][0]

        # count axis: 1, 2, 4, ... (every, or every second, power), equal
        # steps, reaching the largest count of any region (shared axis)
        ax = find_class(pa, "axis-count")
        check(len(ax) == 1, "%s/%s: count axis" % (label, name))
        ticks = [t for t in find_class(ax[0], "tick")
                 if "zero" not in classes(t)] if ax else []
        vals = [int(text_of(t)) for t in ticks]
        ys = [float(t.get("y")) for t in ticks]
        check(len(vals) >= 3 and vals[0] == 1,
              "%s/%s: count labels start at 1: %s" % (label, name, vals))
        ratio = vals[1] // vals[0] if len(vals) > 1 else 0
        check(ratio in (2, 4) and all(b == a * ratio for a, b in
                                      zip(vals, vals[1:])),
              "%s/%s: count labels double: %s" % (label, name, vals))
        steps = [a - b for a, b in zip(ys, ys[1:])]
        check(steps and all(abs(s - steps[0]) < 0.15 for s in steps)
              and steps[0] > 0,
              "%s/%s: doubling ticks equally spaced: %s" % (label, name,
                                                            steps))
        check(vals and vals[-1] * ratio >= allmax,
              "%s/%s: axis reaches the largest count %d: %s" % (
                  label, name, allmax, vals))
        zeros_tick = [t for t in find_class(ax[0], "zero")] if ax else []
        check(len(zeros_tick) == 1 and text_of(zeros_tick[0]) == "0" and
              float(zeros_tick[0].get("y")) > ys[0],
              "%s/%s: a zero row under the log axis" % (label, name))

        # points, zeros, gaps
        series = data.get(name)
        if series is not None:
            dates = sorted(series)
            asof = g.get("data-as-of")
            vals_d = [series[d] for d in dates if d <= asof]
            npos = sum(1 for v in vals_d if v is not None and v > 0)
            nzero = sum(1 for v in vals_d if v == 0)
            # missing: dates absent inside the span, or empty fields
            import datetime
            d0 = datetime.date.fromisoformat(dates[0])
            d1 = datetime.date.fromisoformat(asof)
            span = [(d0 + datetime.timedelta(days=k)).isoformat()
                    for k in range((d1 - d0).days + 1)]
            miss = [series.get(d) is None for d in span]
            runs = sum(1 for k, m in enumerate(miss)
                       if m and (k == 0 or not miss[k - 1]))
            cnt = find_class(pa, "counts")
            zer = find_class(pa, "zeros")
            gaps = find_class(pa, "missing")
            check(len(cnt) == 1 and len(list(cnt[0])) == npos,
                  "%s/%s: %d count points" % (label, name, npos))
            check(len(zer) == 1 and len(list(zer[0])) == nzero,
                  "%s/%s: %d zero marks" % (label, name, nzero))
            if len(zer) == 1 and nzero:
                zy = float(zeros_tick[0].get("y"))
                check(all(abs(float(c.get("cy")) - zy) < 3 and
                          c.get("fill", zer[0].get("fill")) == "none"
                          for c in zer[0]),
                      "%s/%s: zero marks open, on the zero row" % (label,
                                                                   name))
            check(len(gaps) == 1 and len(list(gaps[0])) == runs,
                  "%s/%s: %d gaps of missing days" % (label, name, runs))
        check(len(find_class(pa, "mean7")) <= 1, "%s/%s: one mean line"
              % (label, name))

        # growth panel: zero line, rate line, band, doubling/halving scale
        zl = find_class(pc, "zero-line")
        check(len(zl) == 1, "%s/%s: zero line" % (label, name))
        dbl = find_class(pc, "axis-doubling")
        check(len(dbl) == 1, "%s/%s: doubling scale" % (label, name))
        if zl and dbl:
            y0 = float(zl[0].get("y1"))
            up = {text_of(t): float(t.get("y")) for t in
                  find_class(dbl[0], "doubling")}
            down = {text_of(t): float(t.get("y")) for t in
                    find_class(dbl[0], "halving")}
            check(up and set(up) == set(down),
                  "%s/%s: doubling and halving labels %s %s" % (
                      label, name, sorted(up), sorted(down)))
            check(all(y < y0 for y in up.values()) and
                  all(y > y0 for y in down.values()),
                  "%s/%s: doubling above zero, halving below" % (label,
                                                                 name))
            # linear growth-rate axis: offset from zero proportional to
            # ln 2 / T (the text baseline sits a constant below the mark)
            pts = sorted((float(k.split()[0]), v) for k, v in up.items())
            if len(pts) >= 2:
                (t1, ya), (t2, yb) = pts[0], pts[-1]
                lines = [float(l.get("y1")) for l in dbl[0].iter(NS + "line")]
                offs = sorted(y0 - y for y in lines if y < y0)
                if len(offs) >= 2:
                    check(abs(offs[-1] / offs[0] / (t2 / t1) - 1) < 0.015,
                          "%s/%s: doubling marks at ln2/T: %s for %s" % (
                              label, name, offs, [p[0] for p in pts]))
        check(len(find_class(pc, "growth-rate")) <= 1,
              "%s/%s: one rolling growth line" % (label, name))

        # date axis: month names
        da = find_class(g, "axis-date")
        def date_label(s):
            # "Mar" (month starts), "4 Mar" (weeks) or a year
            w = s.split()
            return (s.isdigit() or (len(w) == 1 and w[0] in MONTHS) or
                    (len(w) == 2 and w[0].isdigit() and w[1] in MONTHS))
        labels = [text_of(t) for t in find_class(da[0], "tick")] if da else []
        check(len(da) == 1 and len(labels) >= 3 and
              all(date_label(s) for s in labels) and
              any(not s.isdigit() for s in labels),
              "%s/%s: date labels %s" % (label, name, labels))

        # heading
        hn = find_class(g, "heading-name")
        hg = find_class(g, "heading-growth")
        check(len(hn) == 1 and (name in text_of(hn[0])),
              "%s/%s: heading names the region" % (label, name))
        check(len(hn) == 1 and rec is not None and
              ("as of " + rec["date"]) in text_of(hn[0]),
              "%s/%s: heading gives the as-of date" % (label, name))
        if len(hg) == 1 and rec is not None:
            words = " ".join(text_of(hg[0]).split())
            r = rec["growth_rate"]
            if rec["trend"] in ("growing", "shrinking"):
                sense = "doubling" if rec["trend"] == "growing" else "halving"
                want = "%s %.1f%% per day, %s in about %s days (interval " \
                       "%s\u2013%s days)" % (
                           rec["trend"], abs(r), sense,
                           days_text(rec["doubling_time"]),
                           days_text(rec["doubling_time_lo"]),
                           days_text(rec["doubling_time_hi"]))
                check(words == want, "%s/%s: heading %r, expected %r" % (
                    label, name, words, want))
            elif rec["trend"] == "no clear trend":
                check(words.startswith("no clear trend:"),
                      "%s/%s: heading %r" % (label, name, words))
            else:
                check(words.startswith("too few counts") or
                      words.startswith("no estimate"),
                      "%s/%s: heading %r" % (label, name, words))
    return root


def png_ok(path, label, min_bytes=20000):
    """The PNG exists, is not tiny and is not one colour."""
    if not check(os.path.exists(path), "%s: %s written" % (label, path)):
        return
    size = os.path.getsize(path)
    check(size >= min_bytes, "%s: PNG of %d bytes" % (label, size))
    from PIL import Image
    with Image.open(path) as im:
        im = im.convert("RGB")
        w, h = im.size
        check(w >= 400 and h >= 400, "%s: PNG %dx%d" % (label, w, h))
        colours = im.getcolors(maxcolors=1 << 20)
        n = len(colours) if colours is not None else 1 << 20
        check(n >= 16, "%s: %d colours" % (label, n))
        # ink: pixels clearly darker than the white page
        small = im.resize((w // 4, h // 4))
        dark = sum(1 for p in small.getdata() if sum(p) < 600)
        frac = dark / float(small.size[0] * small.size[1])
        check(0.01 < frac < 0.7, "%s: ink covers %.3f of the page" % (label,
                                                                     frac))
        # some colour besides greys (the palette is in use)
        hue = sum(1 for p in small.getdata() if max(p) - min(p) > 60)
        check(hue > 50, "%s: %d coloured pixels" % (label, hue))


def render(svg, work, label):
    rsvg = shutil.which("rsvg-convert")
    chrome = shutil.which("chromium") or shutil.which("chromium-browser")
    if not check(rsvg is not None,
                 "rsvg-convert not installed (Debian librsvg2-bin; "
                 "tools/setup installs it)"):
        pass
    else:
        out = os.path.join(work, label + "-rsvg.png")
        p = subprocess.run([rsvg, "-w", "1000", "-o", out, svg],
                           capture_output=True, text=True)
        check(p.returncode == 0 and p.stderr.strip() == "",
              "%s: rsvg-convert: %d %s" % (label, p.returncode, p.stderr))
        png_ok(out, label + " (librsvg)")
    if not check(chrome is not None,
                 "chromium not installed (Debian chromium; tools/setup "
                 "installs it)"):
        return
    out = os.path.join(work, label + "-chromium.png")
    profile = tempfile.mkdtemp(prefix="twofold-chromium.")
    try:
        p = subprocess.run(
            [chrome, "--headless", "--no-sandbox", "--disable-gpu",
             "--disable-quic", "--no-first-run",
             "--disable-background-networking", "--disable-component-update",
             "--disable-sync", "--hide-scrollbars",
             "--user-data-dir=" + profile, "--screenshot=" + out,
             "--window-size=820,1400", "file://" + os.path.abspath(svg)],
            capture_output=True, text=True, timeout=180, cwd=work)
    except subprocess.TimeoutExpired:
        check(False, "%s: chromium timed out" % label)
        return
    finally:
        shutil.rmtree(profile, ignore_errors=True)
    check(p.returncode == 0, "%s: chromium exit %d: %s" % (
        label, p.returncode, p.stderr[-500:]))
    png_ok(out, label + " (chromium)")


def small_input(path):
    """Three regions with known growth and one with zeros and gaps.

    counts = round(exp(a + r t)) with r = ln 2 / 7 (doubling in 7 days),
    r = -ln 2 / 14 (halving in 14 days), r = 0; no weekday effect.  The
    fourth region has low counts with zeros and two missing runs."""
    import datetime
    start = datetime.date(2024, 3, 4)
    rows = ["region,date,cases"]
    spec = [("Alder Vale", math.log(20), LN2 / 7),
            ("Birch Fen", math.log(4000), -LN2 / 14),
            ("Cedar Moss", math.log(300), 0.0)]
    n = 56
    for name, a, r in spec:
        for t in range(n):
            d = (start + datetime.timedelta(days=t)).isoformat()
            rows.append("%s,%s,%d" % (name, d, int(math.floor(
                math.exp(a + r * t) + 0.5))))
    low = [0, 1, 0, 2, 1, 0, 3]
    for t in range(n):
        d = (start + datetime.timedelta(days=t)).isoformat()
        if 20 <= t < 23:
            continue                      # absent rows: missing days
        v = "" if t == 40 else str(low[t % 7] + t // 14)   # empty: missing
        rows.append('"Dune, West",%s,%s' % (d, v))
    with open(path, "w") as f:
        f.write("\n".join(rows) + "\n")


def records_of(stdout):
    return [json.loads(line) for line in stdout.splitlines() if line.strip()]


def main():
    if not os.access(TWOFOLD, os.X_OK):
        print("FAIL: no program " + TWOFOLD, file=sys.stderr)
        return 1
    work = tempfile.mkdtemp(prefix="twofold-charts.")
    try:
        # --- the small known input -------------------------------------
        small = os.path.join(work, "small.csv")
        small_input(small)
        svg = os.path.join(work, "small.svg")
        p = run(["--svg", svg, "-f", "json", small])
        check(p.returncode == 0, "small: exit %d: %s" % (p.returncode,
                                                         p.stderr))
        recs = records_of(p.stdout)
        plain = run(["-f", "json", small])
        check(plain.stdout == p.stdout, "small: --svg leaves records as they are")
        data = read_csv(small)
        root = check_svg(svg, recs, data, "small")
        if root is not None:
            names = [g.get("data-region") for g in find_class(root, "region")]
            built = [n for n in names if n in ("Alder Vale", "Cedar Moss",
                                               "Birch Fen")]
            check(names[0] == "(total)" and
                  built == ["Alder Vale", "Cedar Moss", "Birch Fen"],
                  "small: growing, flat, shrinking order: %s" % names)
            heads = {g.get("data-region"): " ".join(text_of(
                find_class(g, "heading-growth")[0]).split())
                for g in find_class(root, "region")}
            a = heads.get("Alder Vale", "")
            b = heads.get("Birch Fen", "")
            check(a.startswith("growing ") and "doubling in about" in a,
                  "small: Alder Vale growing: %r" % a)
            check(b.startswith("shrinking ") and "halving in about" in b,
                  "small: Birch Fen shrinking: %r" % b)
            try:
                ta = float(a.split("about ")[1].split()[0])
                tb = float(b.split("about ")[1].split()[0])
            except (IndexError, ValueError):
                ta = tb = float("nan")
            check(abs(ta - 7) <= 0.3, "small: doubling time %r, built 7" % ta)
            check(abs(tb - 14) <= 1, "small: halving time %r, built 14" % tb)
            ra = [r for r in recs if r["region"] == "Alder Vale"][0]
            check(abs(ra["growth_rate"] / 100 - LN2 / 7) < 0.01,
                  "small: Alder Vale rate %r, built %r" % (
                      ra["growth_rate"], 100 * LN2 / 7))
        # same input, same bytes
        svg2 = os.path.join(work, "small2.svg")
        run(["--svg", svg2, small])
        with open(svg, "rb") as f1, open(svg2, "rb") as f2:
            check(f1.read() == f2.read(), "small: same input, same bytes")
        render(svg, work, "small")

        # --- written whole or not at all ------------------------------
        bad = os.path.join(work, "bad.csv")
        with open(bad, "w") as f:
            f.write("region,date,cases\nX,2024-01-01,3\nX,2024-01-02,-1\n")
        keep = os.path.join(work, "keep.svg")
        with open(keep, "w") as f:
            f.write("old\n")
        p = run(["--svg", keep, bad])
        check(p.returncode == 3, "bad input: exit %d" % p.returncode)
        with open(keep) as f:
            check(f.read() == "old\n", "bad input: old chart untouched")
        nodir = os.path.join(work, "no-such-folder", "x.svg")
        p = run(["--svg", nodir, small])
        check(p.returncode == 4 and not os.path.exists(nodir),
              "unwritable --svg: exit %d" % p.returncode)
        check([f for f in os.listdir(work) if f.startswith(".")] == [],
              "no temporary files left")
        p = run(["--svg", keep, "--summary", small])
        check(p.returncode == 2, "--svg with --summary: usage error")

        # --- the demo --------------------------------------------------
        svg = os.path.join(work, "demo.svg")
        p = run(["--svg", svg, "-f", "json", DEMO])
        check(p.returncode == 0, "demo: exit %d: %s" % (p.returncode,
                                                        p.stderr))
        recs = records_of(p.stdout)
        check(len(recs) == 7, "demo: 7 records")
        check_svg(svg, recs, read_csv(DEMO), "demo")
        render(svg, work, "demo")
    finally:
        if failures:
            print("charts: %d failures; files kept in %s" % (len(failures),
                                                             work),
                  file=sys.stderr)
        else:
            shutil.rmtree(work, ignore_errors=True)
    if failures:
        return 1
    print("charts: all checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
