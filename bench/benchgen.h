/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * benchgen.h - the invented benchmark scenario, shared by the benchmark
 * programs (see bench/README.md and make-bench-data.c).
 */
#ifndef TWOFOLD_BENCHGEN_H
#define TWOFOLD_BENCHGEN_H

#include <stddef.h>

/* 10,000 invented districts ("district-00001" ...), 730 days from
 * 2024-01-01 (a Monday) to 2025-12-30. */
#define BENCHGEN_REGIONS 10000
#define BENCHGEN_DAYS 730
#define BENCHGEN_START_YEAR 2024
#define BENCHGEN_START_MONTH 1
#define BENCHGEN_START_MDAY 1
#define BENCHGEN_FIRST_WEEKDAY 1 /* ISO weekday of the first day */
#define BENCHGEN_SEED 20240101UL

/* The counts of district number index (0-based) over days 0..days-1:
 * cases[t] and admissions[t] (either may be NULL), NaN on the rare days
 * whose row the file leaves out.  The same index and days always give the
 * same numbers (GSL MT19937 seeded with BENCHGEN_SEED + index).  Returns 0,
 * or -1 when out of memory. */
int benchgen_region(size_t index, size_t days, double *cases,
                    double *admissions);

/* The district's name, "district-%05zu" of index + 1, into buf. */
void benchgen_name(size_t index, char *buf, size_t size);

#endif
