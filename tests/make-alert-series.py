#!/usr/bin/python3
# SPDX-License-Identifier: GPL-3.0-or-later
"""Invented daily count series for the twofold-breaks and twofold-alert
command tests (tests/cli/breaks-* and alert-*).  Poisson counts drawn with
numpy's PCG64 generator from the fixed seed below, so the files are the
same on every run; the places and numbers are invented.

  flat.csv    Flatmoor: 120 days from 2026-01-05, expected 200 a day
              throughout (growth rate 0: no change).
  upturn.csv  Risebank: 120 days from 2026-01-05, expected 200 a day up to
              2026-04-24, then growing at 0.08 per day (doubling time
              8.7 days) from 2026-04-24 on: the first day of the new slope
              is 2026-04-24, day index 109, ten days before the last day
              2026-05-04 (the convention of examples/README.md: the
              expected count of 2026-04-25 is 200 exp(0.08)).

Usage: make-alert-series.py OUTDIR   (writes OUTDIR/flat.csv and
OUTDIR/upturn.csv)
"""
import datetime
import math
import sys

import numpy as np

SEED = 20261201
START = datetime.date(2026, 1, 5)
DAYS = 120
BREAK = 109
RATE = 0.08


def write(path, region, means, rng):
    with open(path, "w") as f:
        f.write("region,date,cases\n")
        for i, mu in enumerate(means):
            day = START + datetime.timedelta(days=i)
            f.write("%s,%s,%d\n" % (region, day.isoformat(), rng.poisson(mu)))


def main():
    out = sys.argv[1]
    rng = np.random.Generator(np.random.PCG64(SEED))
    write(out + "/flat.csv", "Flatmoor", [200.0] * DAYS, rng)
    means = [200.0 * math.exp(RATE * max(0, i - BREAK)) for i in range(DAYS)]
    write(out + "/upturn.csv", "Risebank", means, rng)


if __name__ == "__main__":
    main()
