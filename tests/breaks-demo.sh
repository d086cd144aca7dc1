#!/bin/bash
# SPDX-License-Identifier: GPL-3.0-or-later
# twofold-breaks finds the demo's true changes in growth near their dates.
#
# The reference is the demo's generator, not our own output:
# examples/truth.csv (written by examples/make-demo.c, fixed seed) lists
# every true change (region, date, rate before, rate after), and
# examples/README.md documents them.  For each true change whose rates
# differ by at least 0.02 per day, some change reported for that region
# must lie within TOL days of the true date.  Smaller changes (Zephrenholt
# -0.012 -> -0.004, Maelcorrin Isles 0 -> 0.015, in low counts) are
# printed with their nearest reported change but not asserted.  The
# control region without any change (Yarrowquist) must get none.
#
# Measured when this test was written (default options, kink segments):
# every asserted change found within 3 days (offsets -2..+3 days); one
# change reported that is not in the truth (Brathvenna Coast, early
# September 2026, growth +1.1 -> +2.0 %/day).
# TOL = 10 days: a change in a growth rate of 0.02/day shows only after
# some days of counts, and the credible intervals of the dates found run
# up to about two weeks; 10 days is the tolerance the test was specified
# with, not fitted to the result.
set -u
if [ -n "${TWOFOLD_SANITIZER_BUILD:-}" ]; then
  echo "*** SKIPPED under sanitizers (TWOFOLD_SANITIZER_BUILD=1): $(basename "$0") is a slow study; the normal build runs it ***"
  exit 77
fi
: "${top_srcdir:?}" "${top_builddir:?}"
LC_ALL=C
export LC_ALL
PYTHON3=${PYTHON3:-/usr/bin/python3}
TOL=10
MIN_DIFF=0.02
prog=$top_builddir/bindings/cli/twofold-breaks
if [ ! -x "$prog" ]; then
  echo "FAIL: $prog not built"
  exit 1
fi
work=$(mktemp -d "${TMPDIR:-/tmp}/twofold-breaks-demo.XXXXXX") || exit 99
trap 'rm -rf "$work"' EXIT

if ! "$prog" --no-total -f tsv "$top_srcdir/examples/demo.csv" \
     >"$work/found.tsv" 2>"$work/err"; then
  echo "FAIL: twofold-breaks failed:"
  cat "$work/err"
  exit 1
fi

"$PYTHON3" - "$work/found.tsv" "$top_srcdir/examples/truth.csv" "$TOL" \
    "$MIN_DIFF" <<'PY'
import csv, datetime, sys
found_path, truth_path, tol, min_diff = sys.argv[1:5]
tol, min_diff = int(tol), float(min_diff)
d = datetime.date.fromisoformat
found = {}
for r in csv.DictReader(open(found_path), delimiter="\t"):
    found.setdefault(r["region"], [])
    if r["date"]:
        found[r["region"]].append(r)
truth = list(csv.DictReader(open(truth_path)))
bad = 0
for t in truth:
    diff = float(t["rate_after"]) - float(t["rate_before"])
    cands = found.get(t["region"], [])
    best = min(cands, key=lambda r: abs((d(r["date"]) - d(t["date"])).days),
               default=None)
    off = (d(best["date"]) - d(t["date"])).days if best else None
    asserted = abs(diff) >= min_diff - 1e-9
    ok = best is not None and abs(off) <= tol
    tag = ("ok" if ok else "FAIL") if asserted else "info"
    bad += asserted and not ok
    print("%-5s %-18s true %s (%+.3f/day)  found %s  offset %s" % (
        tag, t["region"], t["date"], diff, best["date"] if best else "-",
        "%+d days" % off if best else "-"))
true_regions = {t["region"] for t in truth}
for region, rows in found.items():
    for r in rows:
        near = [t for t in truth if t["region"] == region and
                abs((d(r["date"]) - d(t["date"])).days) <= tol]
        if not near:
            tag = "info" if region in true_regions else "FAIL"
            bad += tag == "FAIL"
            print("%-5s %-18s reported %s matches no true change "
                  "(growth %.2f -> %.2f %%/day)" % (
                      tag, region, r["date"], float(r["growth_before"]),
                      float(r["growth_after"])))
for region in found:
    if region not in true_regions and not found[region]:
        print("ok    %-18s no true change, none reported" % region)
sys.exit(1 if bad else 0)
PY
status=$?
if [ "$status" -ne 0 ]; then
  echo "FAIL: a true change was not found within $TOL days, or a change"
  echo "      was reported in the control region"
  exit 1
fi
echo "ok: every true change of at least $MIN_DIFF/day found within $TOL days"
