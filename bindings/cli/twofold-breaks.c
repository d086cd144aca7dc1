/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * twofold-breaks - changes in the growth rate of daily counts per region.
 *
 * For each region, and for their sum, compute the Bayesian changepoint
 * posterior of libtwofold(3) (Fearnhead 2006, Statistics and Computing
 * 16:203-213; kinks by Laplace messages after Fearnhead & Liu 2011,
 * Statistics and Computing 21:217-229) and report the changes of the most
 * probable segmentation: date, date interval, the probability of a change
 * in that interval and the growth rate before and after; or, with
 * --daily, the per-day probability of a change and growth rate.  See
 * twofold-breaks(1).
 *
 * The command only translates: options in, library calls, records out.
 */
#include "breaks-common.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#ifdef __GLIBC__
#include <malloc.h>
#endif

#define PROGRAM "twofold-breaks"

typedef struct options {
  int format;
  const char *output;
  int daily;
  bk_model model;
  bk_input in;
} options;

static int usage(FILE *f) {
  fprintf(f,
          "Usage: %s [OPTION]... [FILE]...\n"
          "Changes in the growth rate of the daily counts in each region of "
          "the CSV\n"
          "FILEs (plain or gzip; '-' or none: standard input), and of their "
          "sum,\n"
          "labelled " BK_TOTAL_LABEL
          ": the date of each change with an interval, the probability\n"
          "of a change in it, and the growth rate before and after.\n"
          "\n",
          PROGRAM);
  int st = bk_print_model_help(f);
  if (st != 0)
    return st;
  bk_print_input_help(f);
  fputs("Output:\n"
        "  -d, --daily                per-day probability of a change and "
        "growth rate\n"
        "  -f, --format=FORMAT        table, tsv, csv or json (default "
        "table)\n"
        "  -o, --output=FILE          write FILE whole or not at all\n"
        "  -h, --help                 show this help and exit\n"
        "  -V, --version              show the version and exit\n"
        "\n"
        "Exit status: 0 success, 1 a requested region or column is absent,\n"
        "2 usage error, 3 unreadable or malformed input, 4 output error.\n"
        "Estimates depend on testing and reporting; a change in reporting "
        "looks\n"
        "like a change in growth.  See twofold-breaks(1).\n",
        f);
  return 0;
}

static const struct option long_options[] = {
    BK_LONG_OPTIONS,
    {"daily", no_argument, NULL, 'd'},
    {"format", required_argument, NULL, 'f'},
    {"output", required_argument, NULL, 'o'},
    {"help", no_argument, NULL, 'h'},
    {"version", no_argument, NULL, 'V'},
    {NULL, 0, NULL, 0}};

/* Parse the command line; returns -1 to go on, or an exit status. */
static int parse_args(int argc, char **argv, options *o) {
  memset(o, 0, sizeof *o);
  o->format = TF_FORMAT_TABLE;
  if (bk_input_init(&o->in, argc) != 0)
    return TF_EXIT_OUTPUT;
  int c, st;
  opterr = 0;
  while ((c = getopt_long(argc, argv, ":" BK_SHORT_OPTIONS "df:o:hV",
                          long_options, NULL)) != -1) {
    st = bk_parse_option(c, optarg, &o->model, &o->in);
    if (st >= 0) {
      if (st > 0)
        return st;
      continue;
    }
    switch (c) {
    case 'd':
      o->daily = 1;
      break;
    case 'f':
      if ((o->format = tf_format_from_name(optarg)) < 0)
        return tf_cli_usage_error(
            "--format: '%s' is not table, tsv, csv or json", optarg);
      break;
    case 'o':
      o->output = optarg;
      break;
    default:
      return tf_cli_other_option(c, usage, argv);
    }
  }
  if ((st = bk_model_check(&o->model)) != 0)
    return st;
  return -1;
}

/* ------------------------------------------------------------------ */
/* Records                                                             */
/* ------------------------------------------------------------------ */

static const tf_column change_cols[] = {
    {"region", TF_ALIGN_LEFT},
    {"column", TF_ALIGN_LEFT},
    {"kind", TF_ALIGN_LEFT},
    {"first_date", TF_ALIGN_LEFT},
    {"last_date", TF_ALIGN_LEFT},
    {"dispersion", TF_ALIGN_RIGHT},
    {"level", TF_ALIGN_RIGHT},
    {"changes", TF_ALIGN_RIGHT},
    {"changes_mean", TF_ALIGN_RIGHT},
    {"change", TF_ALIGN_RIGHT},
    {"date", TF_ALIGN_LEFT},
    {"date_lo", TF_ALIGN_LEFT},
    {"date_hi", TF_ALIGN_LEFT},
    {"probability", TF_ALIGN_RIGHT},
    {"growth_before", TF_ALIGN_RIGHT},
    {"growth_before_lo", TF_ALIGN_RIGHT},
    {"growth_before_hi", TF_ALIGN_RIGHT},
    {"growth_after", TF_ALIGN_RIGHT},
    {"growth_after_lo", TF_ALIGN_RIGHT},
    {"growth_after_hi", TF_ALIGN_RIGHT},
    {"status", TF_ALIGN_LEFT}};
#define NCHANGE (sizeof change_cols / sizeof change_cols[0])

static const tf_column daily_cols[] = {
    {"region", TF_ALIGN_LEFT},
    {"column", TF_ALIGN_LEFT},
    {"date", TF_ALIGN_LEFT},
    {"count", TF_ALIGN_RIGHT},
    {"p_change", TF_ALIGN_RIGHT},
    {"growth_rate", TF_ALIGN_RIGHT},
    {"growth_rate_lo", TF_ALIGN_RIGHT},
    {"growth_rate_hi", TF_ALIGN_RIGHT},
    {"sense", TF_ALIGN_LEFT},
    {"doubling_time", TF_ALIGN_RIGHT},
    {"doubling_time_lo", TF_ALIGN_RIGHT},
    {"doubling_time_hi", TF_ALIGN_RIGHT}};
#define NDAILY (sizeof daily_cols / sizeof daily_cols[0])

#define NCOLS_MAX NCHANGE

/* The table for people: fewer, rounded columns (see twofold-breaks(1)). */
static size_t record_columns(const options *o, tf_column *cols,
                             char *ci_header, size_t size) {
  size_t n = 0;
  if (o->format != TF_FORMAT_TABLE) {
    const tf_column *src = o->daily ? daily_cols : change_cols;
    n = o->daily ? NDAILY : NCHANGE;
    memcpy(cols, src, n * sizeof *cols);
    return n;
  }
  double level = o->model.have_level ? o->model.level : 0;
  if (!o->model.have_level) {
    twofold_cp_options *d = NULL;
    if (twofold_cp_options_new(&d) == 0)
      level = twofold_cp_options_get_level(d);
    twofold_cp_options_free(d);
  }
  tf_cli_ci_header(ci_header, size, level);
  cols[n++] = (tf_column){"region", TF_ALIGN_LEFT};
  cols[n++] = (tf_column){"date", TF_ALIGN_LEFT};
  if (o->daily) {
    cols[n++] = (tf_column){"count", TF_ALIGN_RIGHT};
    cols[n++] = (tf_column){"P(change)", TF_ALIGN_RIGHT};
    cols[n++] = (tf_column){"%/day", TF_ALIGN_RIGHT};
    cols[n++] = (tf_column){ci_header, TF_ALIGN_LEFT};
    cols[n++] = (tf_column){"dbl/hlv", TF_ALIGN_RIGHT};
  } else {
    cols[n++] = (tf_column){"interval", TF_ALIGN_LEFT};
    cols[n++] = (tf_column){"P", TF_ALIGN_RIGHT};
    cols[n++] = (tf_column){"before %/day", TF_ALIGN_RIGHT};
    cols[n++] = (tf_column){"after %/day", TF_ALIGN_RIGHT};
  }
  return n;
}

static const char *date_range_text(char *out, size_t size, int32_t a,
                                   int32_t b) {
  char x[16], y[16];
  if (twofold_date_format(a, x, sizeof x) != 0 ||
      twofold_date_format(b, y, sizeof y) != 0)
    return NULL;
  snprintf(out, size, "%s..%s", x, y);
  return out;
}

/* One segment's growth rate in percent per day, and its interval. */
typedef struct seg_rate {
  double r, lo, hi;
} seg_rate;

static seg_rate segment_rate(const bk_fit *f, size_t k) {
  seg_rate s = {NAN, NAN, NAN};
  if (twofold_changes_map_segment(f->ch, k, NULL, NULL, &s.r, &s.lo, &s.hi,
                                  NULL) != 0)
    s.r = s.lo = s.hi = NAN;
  s.r *= 100;
  s.lo *= 100;
  s.hi *= 100;
  return s;
}

/* The change records of one target: one per change of the most probable
 * segmentation, or one with empty change fields if there is none. */
static int write_changes(const options *o, tf_writer *w, const bk_fit *f) {
  const bk_target *t = f->t;
  const char *region = twofold_series_region(t->s);
  char sbuf[32];
  size_t K = f->status == 0 ? twofold_changes_map_count(f->ch) : 0;
  for (size_t k = 0; k < (K ? K : 1); k++) {
    size_t day = 0, from = 0, to = 0;
    double prob = NAN;
    int have = 0;
    if (K > 0 &&
        twofold_changes_map_change(f->ch, k, &day, &from, &to, &prob) == 0)
      have = 1;
    seg_rate before = {NAN, NAN, NAN}, after = {NAN, NAN, NAN};
    if (f->status == 0) {
      if (have)
        before = segment_rate(f, k);
      after = segment_rate(f, have ? k + 1 : 0);
    }
    int32_t d0 = f->first_day;
    tf_cell c[NCHANGE];
    size_t n = 0;
    if (o->format == TF_FORMAT_TABLE) {
      char iv[48], bt[32], at[32];
      c[n++] = tf_cell_str(region);
      c[n++] = have ? tf_cell_date(d0 + (int32_t)day) : tf_cell_null();
      c[n++] = f->status != 0
                   ? tf_cell_str(tf_cli_status_name(f->status, sbuf,
                                                    sizeof sbuf))
               : have ? tf_cell_str(date_range_text(iv, sizeof iv,
                                                    d0 + (int32_t)from,
                                                    d0 + (int32_t)to))
                      : tf_cell_str("no change");
      c[n++] = have ? tf_cell_dbl(prob, 2) : tf_cell_null();
      c[n++] = tf_cell_str(
          have ? tf_cli_format_number(bt, sizeof bt, before.r, 1, 1) : NULL);
      c[n++] = tf_cell_str(f->status == 0 ? tf_cli_format_number(
                                                at, sizeof at, after.r, 1, 1)
                                          : NULL);
      if (tf_writer_row(w, c) != 0)
        return -1;
      continue;
    }
    c[n++] = tf_cell_str(region);
    c[n++] = tf_cell_str(twofold_series_column_name(t->s, t->col));
    c[n++] = tf_cell_str(twofold_cp_kind_to_string(
        f->status == 0 ? twofold_changes_kind(f->ch) : -1));
    c[n++] = f->n ? tf_cell_date(d0) : tf_cell_null();
    c[n++] = f->n ? tf_cell_date(d0 + (int32_t)(f->n - 1)) : tf_cell_null();
    c[n++] = tf_cell_dbl(
        f->status == 0 ? twofold_changes_dispersion(f->ch) : NAN, -1);
    c[n++] = tf_cell_dbl(f->level, -1);
    c[n++] = f->status == 0 ? tf_cell_int((long long)K) : tf_cell_null();
    c[n++] = tf_cell_dbl(
        f->status == 0 ? twofold_changes_count_mean(f->ch) : NAN, -1);
    c[n++] = have ? tf_cell_int((long long)k + 1) : tf_cell_null();
    c[n++] = have ? tf_cell_date(d0 + (int32_t)day) : tf_cell_null();
    c[n++] = have ? tf_cell_date(d0 + (int32_t)from) : tf_cell_null();
    c[n++] = have ? tf_cell_date(d0 + (int32_t)to) : tf_cell_null();
    c[n++] = tf_cell_dbl(have ? prob : NAN, -1);
    c[n++] = tf_cell_dbl(before.r, -1);
    c[n++] = tf_cell_dbl(before.lo, -1);
    c[n++] = tf_cell_dbl(before.hi, -1);
    c[n++] = tf_cell_dbl(after.r, -1);
    c[n++] = tf_cell_dbl(after.lo, -1);
    c[n++] = tf_cell_dbl(after.hi, -1);
    c[n++] = tf_cell_str(tf_cli_status_name(f->status, sbuf, sizeof sbuf));
    if (tf_writer_row(w, c) != 0)
      return -1;
  }
  return 0;
}

/* The per-day records of one target. */
static int write_daily(const options *o, tf_writer *w, const bk_fit *f) {
  const bk_target *t = f->t;
  const char *region = twofold_series_region(t->s);
  if (f->status != 0) {
    /* No per-day quantities: say why on standard error. */
    char sbuf[32];
    tf_cli_msg("%s: no estimate (%s): %s", region,
               tf_cli_status_name(f->status, sbuf, sizeof sbuf), f->msg);
    return 0;
  }
  for (size_t i = 0; i < f->n; i++) {
    tf_cell c[NDAILY];
    size_t n = 0;
    int32_t day = f->first_day + (int32_t)i;
    if (o->format == TF_FORMAT_TABLE) {
      char ci[80];
      /* Doubling or halving times only where the interval for the
       * growth rate excludes 0, as twofold(1) shows them. */
      int clear = f->glo[i] > 0 || f->ghi[i] < 0;
      c[n++] = tf_cell_str(region);
      c[n++] = tf_cell_date(day);
      c[n++] = tf_cell_dbl(f->y[i], 0);
      c[n++] = tf_cell_dbl(f->p[i], 3);
      c[n++] = tf_cell_dbl_signed(100 * f->g[i], 1);
      c[n++] = tf_cell_str(tf_cli_range_text(
          ci, sizeof ci, 100 * f->glo[i], 100 * f->ghi[i], 1, 1));
      c[n++] = clear ? tf_cell_dbl(f->dt[i], 1) : tf_cell_null();
    } else {
      c[n++] = tf_cell_str(region);
      c[n++] = tf_cell_str(twofold_series_column_name(t->s, t->col));
      c[n++] = tf_cell_date(day);
      c[n++] = tf_cell_dbl(f->y[i], 0);
      c[n++] = tf_cell_dbl(f->p[i], -1);
      c[n++] = tf_cell_dbl(100 * f->g[i], -1);
      c[n++] = tf_cell_dbl(100 * f->glo[i], -1);
      c[n++] = tf_cell_dbl(100 * f->ghi[i], -1);
      c[n++] = tf_cell_sense(f->sense[i]);
      c[n++] = tf_cell_dbl(f->sense[i] ? f->dt[i] : NAN, -1);
      c[n++] = tf_cell_dbl(f->sense[i] ? f->dtlo[i] : NAN, -1);
      c[n++] = tf_cell_dbl(f->sense[i] ? f->dthi[i] : NAN, -1);
    }
    if (tf_writer_row(w, c) != 0)
      return -1;
  }
  return 0;
}

/* ------------------------------------------------------------------ */
/* main                                                                */
/* ------------------------------------------------------------------ */

typedef struct job {
  const twofold_cp_options *cpo;
  const bk_input *in;
  const bk_target *targets;
  bk_fit *fits;
} job;

static int fit_one(void *ctx, size_t i) {
  job *jb = ctx;
  int st = bk_fit_run(&jb->fits[i], jb->cpo, jb->in, &jb->targets[i]);
  /* every posterior is kept until the output: without what only sampling
   * needs */
  if (st == 0 && jb->fits[i].ch != NULL)
    (void)twofold_changes_shrink(jb->fits[i].ch);
  return st;
}

static int run(const options *o, char **files, size_t nfiles) {
  twofold_cp_options *cpo = NULL;
  twofold_set *set = NULL;
  twofold_series *total = NULL;
  bk_target *targets = NULL;
  size_t ntargets = 0;
  tf_output *out = NULL;
  tf_writer *w = NULL;
  bk_fit *fits = NULL;
  int st;

  if ((st = bk_cp_options(&o->model, &cpo)) != 0)
    goto done;
  if ((st = bk_read(&o->in, files, nfiles, &set)) != TF_EXIT_OK)
    goto done;
  if ((st = bk_select_targets(&o->in, set, &total, &targets, &ntargets)) !=
      TF_EXIT_OK)
    goto done;
  fits = calloc(ntargets ? ntargets : 1, sizeof *fits);
  if (fits == NULL) {
    tf_cli_msg("out of memory");
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  /* The output opens before the posteriors (a file is still written whole
   * or not at all: tf_output commits it at the end); regions are analysed
   * in batches of a few per thread, written, and freed, so memory stays
   * that of one batch however many regions there are. */
  if ((out = tf_output_open(o->output)) == NULL) {
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  tf_column cols[NCOLS_MAX];
  char ci_header[48];
  size_t ncols = record_columns(o, cols, ci_header, sizeof ci_header);
  w = tf_writer_new(tf_output_stream(out), o->format, cols, ncols);
  if (w == NULL) {
    tf_cli_msg("out of memory");
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  size_t batch = 16 * (size_t)(o->in.threads > 0 ? o->in.threads : 1);
  for (size_t b0 = 0; b0 < ntargets && st == TF_EXIT_OK; b0 += batch) {
    size_t nb = ntargets - b0 < batch ? ntargets - b0 : batch;
    job jb = {cpo, &o->in, targets + b0, fits + b0};
    if ((st = bk_parallel(nb, o->in.threads, fit_one, &jb)) != TF_EXIT_OK)
      goto done;
    for (size_t i = b0; i < b0 + nb && st == TF_EXIT_OK; i++) {
      st = (o->daily ? write_daily(o, w, &fits[i])
                     : write_changes(o, w, &fits[i])) == 0
               ? TF_EXIT_OK
               : -1;
      bk_fit_free(&fits[i]);
    }
  }
  st = tf_output_end(&out, w, st, o->output);
done:
  tf_output_abort(out);
  tf_writer_free(w);
  for (size_t i = 0; fits != NULL && i < ntargets; i++)
    bk_fit_free(&fits[i]);
  free(fits);
  free(targets);
  twofold_series_free(total);
  twofold_set_free(set);
  twofold_cp_options_free(cpo);
  return st;
}

int main(int argc, char **argv) {
  tf_cli_set_program(PROGRAM);
#ifdef __GLIBC__
  /* Each posterior takes a few MB of candidate segments for the length of
   * its run.  glibc would hand blocks that large back to the system when
   * freed (mmap, or trimming the heap) and fault the pages in afresh for
   * the next region, 10 to 15 % of the CPU time on one thread; kept in the
   * heap, they are reused.  Peak memory is unchanged: at most the regions
   * of one batch are live at once either way. */
  (void)mallopt(M_MMAP_THRESHOLD, 64 << 20);
  (void)mallopt(M_TRIM_THRESHOLD, 256 << 20);
#endif
  options o;
  int st = parse_args(argc, argv, &o);
  if (st < 0)
    st = run(&o, argv + optind, (size_t)(argc - optind));
  bk_input_free(&o.in);
  return st;
}
