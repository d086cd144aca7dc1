/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * breaks-common.h - what twofold-breaks and twofold-alert share: the
 * changepoint model options (kind, priors, dispersion), --as-of and
 * --threads beside the input options of cli.h, choosing the series to
 * analyse and running the changepoint posterior of libtwofold(3) on each.
 *
 * The defaults of the model options are never kept here: they are read
 * from a fresh twofold_cp_options object, so the help text and the man
 * pages follow the library.
 */
#ifndef TWOFOLD_BREAKS_COMMON_H
#define TWOFOLD_BREAKS_COMMON_H

#include "cli.h"

#include <getopt.h>

/* The label of the sum over all regions (as twofold(1) labels it). */
#define BK_TOTAL_LABEL "(total)"

/* Model options given on the command line (have_* says which). */
typedef struct bk_model {
  int have_kind, kind;
  int have_per_year;
  double per_year;
  int have_prob;
  double prob;
  int have_min_segment;
  long min_segment;
  int have_shape;
  long shape;
  int have_rate_sd;
  double rate_sd;
  int have_rate_mean;
  double rate_mean;
  int have_dispersion;
  double dispersion; /* 0: estimate */
  int have_weekday, weekday;
  int have_level;
  double level;
  int have_clean, clean;
} bk_model;

/* Input and selection options. */
typedef struct bk_input {
  tf_cli_input io; /* columns, layout, regions (cli.h) */
  int have_as_of;
  int32_t as_of;
  int threads; /* regions analysed at once */
} bk_input;

/* Option codes of the shared long options (above any short option). */
enum {
  BK_OPT_KIND = 300,
  BK_OPT_PER_YEAR,
  BK_OPT_PROB,
  BK_OPT_MIN_SEGMENT,
  BK_OPT_SHAPE,
  BK_OPT_RATE_SD,
  BK_OPT_RATE_MEAN,
  BK_OPT_DISPERSION,
  BK_OPT_WEEKDAY,
  BK_OPT_NO_WEEKDAY,
  BK_OPT_LEVEL,
  BK_OPT_CLEAN,
  BK_OPT_NO_CLEAN,
  BK_OPT_AS_OF,
  BK_OPT_THREADS,
  BK_OPT_LAST_
};

/* The shared long options, to be copied into a command's table. */
#define BK_LONG_OPTIONS                                                      \
  {"kind", required_argument, NULL, 'k'},                                    \
      {"changes-per-year", required_argument, NULL, BK_OPT_PER_YEAR},        \
      {"change-prob", required_argument, NULL, BK_OPT_PROB},                 \
      {"min-segment", required_argument, NULL, BK_OPT_MIN_SEGMENT},          \
      {"length-shape", required_argument, NULL, BK_OPT_SHAPE},               \
      {"rate-sd", required_argument, NULL, BK_OPT_RATE_SD},                  \
      {"rate-mean", required_argument, NULL, BK_OPT_RATE_MEAN},              \
      {"dispersion", required_argument, NULL, BK_OPT_DISPERSION},            \
      {"weekday", no_argument, NULL, BK_OPT_WEEKDAY},                        \
      {"no-weekday", no_argument, NULL, BK_OPT_NO_WEEKDAY},                  \
      {"level", required_argument, NULL, 'l'},                               \
      {"clean", no_argument, NULL, BK_OPT_CLEAN},                            \
      {"no-clean", no_argument, NULL, BK_OPT_NO_CLEAN},                      \
      TF_INPUT_LONG_OPTIONS,                                                 \
      {"threads", required_argument, NULL, BK_OPT_THREADS},                  \
  {                                                                          \
    "as-of", required_argument, NULL, 'a'                                    \
  }
/* Their short forms for getopt_long's option string. */
#define BK_SHORT_OPTIONS "k:l:" TF_INPUT_SHORT_OPTIONS "a:"

/* Set the defaults of in (regions: room for nargs names).  0 or
 * TF_EXIT_OUTPUT (out of memory, message printed). */
int bk_input_init(bk_input *in, int nargs);
void bk_input_free(bk_input *in);

/* Handle option c with argument arg if it is a shared one: returns -1
 * when c is not a shared option, 0 when handled, or an exit status after
 * printing a usage message. */
int bk_parse_option(int c, const char *arg, bk_model *m, bk_input *in);

/* Reject contradictory model options; 0 or TF_EXIT_USAGE. */
int bk_model_check(const bk_model *m);

/* Print the help text of the shared options, with the library's
 * defaults, to f.  0, or TF_EXIT_OUTPUT when out of memory. */
int bk_print_model_help(FILE *f);
void bk_print_input_help(FILE *f);

/* Build the changepoint options from the library defaults and m.
 * 0, TF_EXIT_USAGE (a value the library refuses: its message is
 * printed) or TF_EXIT_OUTPUT (out of memory). */
int bk_cp_options(const bk_model *m, twofold_cp_options **out);

/* Read the input files ("-" or none: standard input) into a new set. */
int bk_read(const bk_input *in, char **files, size_t nfiles,
            twofold_set **out);

/* One series to analyse: a region or the total, and its count column. */
typedef struct bk_target {
  const twofold_series *s; /* borrowed from the set, or the total */
  size_t col;
} bk_target;

/* The selected regions in input (or --region) order, then the total.
 * *total receives the total series, which the caller frees, and *out the
 * array, which the caller frees.  TF_EXIT_OK, TF_EXIT_DATA (a requested
 * region or column is absent, or a region is called "(total)") or
 * TF_EXIT_OUTPUT. */
int bk_select_targets(const bk_input *in, const twofold_set *set,
                      twofold_series **total, bk_target **out, size_t *n);

/* The posterior of one target and its per-day quantities. */
typedef struct bk_fit {
  const bk_target *t;
  int status;        /* 0, or the run's TWOFOLD_E... status (no data, ...) */
  const char *msg;   /* the library's message when status != 0           */
  int32_t first_day; /* the day of index 0                               */
  size_t n;          /* days analysed                                    */
  const double *y;   /* the counts of those days (borrowed)              */
  twofold_changes *ch;
  double *p, *g, *glo, *ghi, *dt, *dtlo, *dthi;
  int *sense;
  double level; /* the credible level used */
} bk_fit;

/* The days analysed: from the first to the last day with a count in the
 * target's column, the last being no later than --as-of.  Runs the
 * posterior; a property of the data (too few days, ...) goes to
 * f->status.  0, or TF_EXIT_OUTPUT (out of memory; message printed). */
int bk_fit_run(bk_fit *f, const twofold_cp_options *o, const bk_input *in,
               const bk_target *t);
void bk_fit_free(bk_fit *f);

/* Run fn(ctx, i) for i = 0..n-1 on up to `threads` threads (regions
 * are independent; each fn call writes only its own slot, so the output
 * does not depend on the number of threads).  Returns the first non-zero
 * status in index order, or 0. */
int bk_parallel(size_t n, int threads, int (*fn)(void *ctx, size_t i),
                void *ctx);
/* The default number of threads: processors online, 1..4. */
int bk_default_threads(void);

/* The standard normal distribution function and the two-sided quantile
 * z with P(|Z| <= z) = level. */
double bk_norm_cdf(double x);
double bk_norm_quantile2(double level);

#endif
