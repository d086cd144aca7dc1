/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * chart.h - growth charts as standalone SVG for the twofold commands.
 *
 * One chart shows every region added, the sum over regions first, then
 * the regions by current growth rate (fastest first), as small multiples
 * on shared scales.  Each region has a heading in words and three panels
 * on one date axis: the daily counts on a doubling (log 2) axis with a
 * 7-day mean, the trend of the latest window and the most probable
 * changepoint segmentation; a strip with the posterior probability of a
 * change on each day; and the growth rate per day with its interval and a
 * scale of doubling and halving times.
 *
 * Every estimate comes from libtwofold (twofold_growth_fit,
 * twofold_growth_roll, twofold_doubling_time, twofold_changes_*); the
 * chart code only computes the 7-day mean shown as a display smoothing and
 * the geometry.  The file is written whole or not at all.
 */
#ifndef TWOFOLD_CHART_H
#define TWOFOLD_CHART_H

#include "twofold.h"

#include <stddef.h>
#include <stdint.h>

typedef struct tf_chart tf_chart;

/* A chart whose window fits use fo (borrowed; it must outlive the chart)
 * on windows of `window` days, at the interval level `level`.  With
 * have_as_of, every region's estimates end on as_of (as twofold --as-of),
 * else on the region's last day with a count.  NULL when out of memory
 * (a message is printed). */
tf_chart *tf_chart_new(const twofold_fit_options *fo, size_t window,
                       double level, int have_as_of, int32_t as_of);
/* Add a region: column col of s (borrowed until tf_chart_write returns),
 * with the log of column ocol as offset of the growth fits (ocol < 0: no
 * offset); is_total marks the sum over regions.  0, or -1 when out of
 * memory (a message is printed, and tf_chart_write then fails). */
int tf_chart_add(tf_chart *c, const twofold_series *s, size_t col, int ocol,
                 int is_total);
/* Compute and write the chart to path ("-": standard output).  Returns
 * TF_EXIT_OK, or TF_EXIT_OUTPUT after printing a message (the target is
 * then left as it was). */
int tf_chart_write(tf_chart *c, const char *path);
void tf_chart_free(tf_chart *c);

#endif
