# SPDX-License-Identifier: GPL-3.0-or-later
"""Check twofold's growth records for internal consistency and, given the
table output of the same run, that the table rounds the same numbers.

Usage: cli-growth-check.py JSONL [TABLE]

The checks use handbook formulas, not the program's own output:
  doubling time T = ln 2 / r, halving time ln 2 / |r| (the handbook
  formula of exponential growth), with the interval mapped end by end from
  r's interval, as for any monotone function, and unbounded (null) on the
  side where r's interval reaches 0 (common practice, no single source);
  weekly change 100 (exp(7 r) - 1) %;
  trend "growing" iff the lower end of r's interval is > 0, "shrinking" iff
  the upper end is < 0 (the definition in twofold(1)).
"""
import datetime
import json
import math
import sys

REQUIRED = ["region", "column", "date", "window_start", "window_end", "days",
            "days_missing", "events", "model", "level", "growth_rate",
            "growth_rate_lo", "growth_rate_hi", "sense", "doubling_time",
            "doubling_time_lo", "doubling_time_hi", "weekly_change",
            "weekly_change_lo", "weekly_change_hi", "trend", "status"]
NUMERIC = ["growth_rate", "growth_rate_lo", "growth_rate_hi", "doubling_time",
           "doubling_time_lo", "doubling_time_hi", "weekly_change",
           "weekly_change_lo", "weekly_change_hi"]
FEW = {"fewevents", "zero", "nodata"}
LN2 = math.log(2)
failures = []


def fail(rec, what):
    failures.append(f"{rec.get('region')} {rec.get('date')}: {what}")


def close(a, b, rel=1e-12):
    return a is not None and b is not None and \
        abs(a - b) <= rel * max(abs(a), abs(b), 1e-300)


def check_record(rec):
    for k in REQUIRED:
        if k not in rec:
            fail(rec, f"key {k} missing")
            return
    day = datetime.date.fromisoformat
    if rec["window_end"] != rec["date"]:
        fail(rec, "window_end != date")
    if (day(rec["window_end"]) - day(rec["window_start"])).days + 1 != rec["days"]:
        fail(rec, "window_start..window_end is not 'days' long")
    if rec["status"] != "ok":
        for k in NUMERIC:
            if rec[k] is not None:
                fail(rec, f"{k} is {rec[k]} for status {rec['status']}")
        want = "too few counts" if rec["status"] in FEW else rec["status"]
        if rec["trend"] != want:
            fail(rec, f"trend {rec['trend']!r}, want {want!r}")
        return
    g, lo, hi = rec["growth_rate"], rec["growth_rate_lo"], rec["growth_rate_hi"]
    if None in (g, lo, hi) or not lo <= g <= hi:
        fail(rec, f"growth_rate {g} not inside [{lo}, {hi}]")
        return
    r, rlo, rhi = g / 100, lo / 100, hi / 100
    sense = "doubling" if r > 0 else "halving" if r < 0 else None
    if rec["sense"] != sense:
        fail(rec, f"sense {rec['sense']}, want {sense}")
    if r != 0:
        if not close(rec["doubling_time"], LN2 / abs(r)):
            fail(rec, f"doubling_time {rec['doubling_time']} != ln2/|r|")
        if r > 0:
            want_lo = LN2 / rhi
            want_hi = LN2 / rlo if rlo > 0 else None
        else:
            want_lo = LN2 / abs(rlo)
            want_hi = LN2 / abs(rhi) if rhi < 0 else None
        if not close(rec["doubling_time_lo"], want_lo):
            fail(rec, f"doubling_time_lo {rec['doubling_time_lo']}, want {want_lo}")
        if want_hi is None:
            if rec["doubling_time_hi"] is not None:
                fail(rec, "doubling_time_hi should be null (unbounded)")
        elif not close(rec["doubling_time_hi"], want_hi):
            fail(rec, f"doubling_time_hi {rec['doubling_time_hi']}, want {want_hi}")
    for k, x in (("weekly_change", r), ("weekly_change_lo", rlo),
                 ("weekly_change_hi", rhi)):
        if not close(rec[k], 100 * math.expm1(7 * x), 1e-9):
            fail(rec, f"{k} {rec[k]} != 100 (exp(7 r) - 1)")
    trend = "growing" if rlo > 0 else "shrinking" if rhi < 0 else "no clear trend"
    if rec["trend"] != trend:
        fail(rec, f"trend {rec['trend']!r}, want {trend!r}")


def fmt(x, plus=False):
    if x is None:
        return "-"
    # Signed cells show the sign of any non-zero value ("+0.0" for 0.01);
    # unsigned ones never show "-0.0".
    if x == 0:
        return "0.0"
    if plus:
        return f"{x:+.1f}"
    s = f"{x:.1f}"
    return "0.0" if s == "-0.0" else s


def check_table(records, path):
    lines = open(path, encoding="utf-8").read().splitlines()
    if len(lines) != len(records) + 1:
        failures.append(f"table has {len(lines) - 1} rows, JSON {len(records)}")
        return
    for rec, line in zip(records, lines[1:]):
        if not line.startswith(rec["region"]):
            fail(rec, f"table row {line!r} is not this region's")
            continue
        cells = line[len(rec["region"]):].split()
        ok = rec["status"] == "ok"
        clear = ok and rec["trend"] in ("growing", "shrinking")
        want = [rec["date"],
                fmt(rec["growth_rate"], True) if ok else "-",
                (fmt(rec["growth_rate_lo"], True) + ".." +
                 fmt(rec["growth_rate_hi"], True)) if ok else "-",
                fmt(rec["doubling_time"]) if clear else "-"]
        want += rec["trend"].split()
        if cells != want:
            fail(rec, f"table cells {cells}, want {want}")


def main():
    records = []
    with open(sys.argv[1], encoding="utf-8") as f:
        for n, line in enumerate(f, 1):
            try:
                records.append(json.loads(line))
            except ValueError as e:
                failures.append(f"line {n}: not JSON: {e}")
    if not records:
        failures.append("no records")
    for rec in records:
        check_record(rec)
    if len(sys.argv) > 2:
        check_table(records, sys.argv[2])
    for f in failures:
        print("FAIL:", f)
    print(f"{len(records)} records checked, {len(failures)} failures")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
