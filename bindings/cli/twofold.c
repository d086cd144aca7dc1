/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * twofold - growth rates and doubling times of daily counts per region.
 *
 * For each region, and for their sum, fit the log-linear count model of
 * libtwofold(3) on a trailing window and report the growth rate with its
 * interval, the doubling or halving time, the weekly change and a trend in
 * plain words.  See twofold(1).
 *
 * The command only translates: options in, library calls, records out.
 */
#include "cli.h"
#include "chart.h" /* --svg */

#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define PROGRAM "twofold"
/* The label of the sum over all regions. */
#define TOTAL_LABEL "(total)"
/* Default window: three whole weeks (see twofold(1)). */
#define WINDOW_DEFAULT 21
#define WINDOW_MAX 3660
/* A batch of targets, estimated on the threads while the previous batch
 * is written: at most BATCH_TARGETS targets and (unless one target has
 * more) BATCH_WINDOWS windows. */
#define BATCH_TARGETS 256
#define BATCH_WINDOWS 65536
#define THREADS_MAX 64

typedef struct options {
  int format;
  const char *output;
  int summary;
  long window;
  int model;
  double level;
  int interval;
  int weekday;
  double min_events;
  const char *offset;
  int have_as_of;
  int32_t as_of;
  int every_day;
  tf_cli_input in; /* columns, layout, regions (cli.h) */
  const char *svg; /* --svg FILE: chart.c */
  int have_gi;
  double gi_mean, gi_sd;
  int threads; /* regions estimated at once */
} options;

/* The default number of threads: processors online, 1..4. */
static int default_threads(void) {
  long c = sysconf(_SC_NPROCESSORS_ONLN);
  if (c < 1)
    c = 1;
  if (c > 4)
    c = 4;
  return (int)c;
}

static int usage(FILE *f) {
  fprintf(f,
"Usage: %s [OPTION]... [FILE]...\n"
"Growth rate, doubling or halving time and trend of the daily counts in\n"
"each region of the CSV FILEs (plain or gzip; '-' or none: standard input),\n"
"and of their sum, labelled " TOTAL_LABEL ".\n"
"\n"
"Estimates:\n"
"  -w, --window=DAYS          days in the fitting window (default %d)\n"
"  -m, --model=MODEL          poisson, quasipoisson or negbin (default negbin)\n"
"  -l, --level=P              interval level, 0 < P < 1 (default 0.95)\n"
"      --interval=KIND        default, wald, profile or small (default default)\n"
"      --no-weekday           no day-of-week effects (default: fitted)\n"
"      --weekday              fit day-of-week effects\n"
"      --min-events=N         fewer counts in a window: too few (default %d)\n"
"      --offset=COLUMN        log of COLUMN as offset (e.g. tests)\n"
"  -g, --generation-interval=MEAN,SD\n"
"                             add the reproduction number R for a gamma\n"
"                             generation interval (days)\n"
"Days and regions:\n"
"  -a, --as-of=DATE           windows end on DATE (default: each region's\n"
"                             last day with a count)\n"
"  -e, --every-day            a row for every day, not only the last\n",
          PROGRAM, WINDOW_DEFAULT, TWOFOLD_MIN_EVENTS_DEFAULT);
  tf_cli_input_help_regions(f, TOTAL_LABEL);
  fputs(
"      --threads=N            regions estimated at once (default: processors\n"
"                             online, at most 4; the output is the same)\n"
"  -s, --summary              describe the input instead: dates, days,\n"
"                             missing days and total count per region\n",
        f);
  tf_cli_input_help(f);
  fputs(
"Output:\n"
"  -f, --format=FORMAT        table, tsv, csv or json (default table)\n"
"  -o, --output=FILE          write FILE whole or not at all\n"
"      --svg=FILE             also draw the growth charts as SVG into FILE\n"
"  -h, --help                 show this help and exit\n"
"  -V, --version              show the version and exit\n"
"\n"
"Exit status: 0 success, 1 a requested region, column or date is absent,\n"
"2 usage error, 3 unreadable or malformed input, 4 output error.\n"
"Estimates depend on testing and reporting; see twofold(1).\n",
        f);
  return 0;
}

enum {
  OPT_INTERVAL = 256,
  OPT_NO_WEEKDAY,
  OPT_WEEKDAY,
  OPT_MIN_EVENTS,
  OPT_OFFSET,
  OPT_SVG,
  OPT_THREADS
};

static const struct option long_options[] = {
    {"window", required_argument, NULL, 'w'},
    {"model", required_argument, NULL, 'm'},
    {"level", required_argument, NULL, 'l'},
    {"interval", required_argument, NULL, OPT_INTERVAL},
    {"no-weekday", no_argument, NULL, OPT_NO_WEEKDAY},
    {"weekday", no_argument, NULL, OPT_WEEKDAY},
    {"min-events", required_argument, NULL, OPT_MIN_EVENTS},
    {"offset", required_argument, NULL, OPT_OFFSET},
    {"generation-interval", required_argument, NULL, 'g'},
    {"as-of", required_argument, NULL, 'a'},
    {"every-day", no_argument, NULL, 'e'},
    {"threads", required_argument, NULL, OPT_THREADS},
    {"summary", no_argument, NULL, 's'},
    TF_INPUT_LONG_OPTIONS,
    {"svg", required_argument, NULL, OPT_SVG},
    {"format", required_argument, NULL, 'f'},
    {"output", required_argument, NULL, 'o'},
    {"help", no_argument, NULL, 'h'},
    {"version", no_argument, NULL, 'V'},
    {NULL, 0, NULL, 0}};

/* Parse the command line; returns -1 to go on, or an exit status. */
static int parse_args(int argc, char **argv, options *o) {
  memset(o, 0, sizeof *o);
  o->format = TF_FORMAT_TABLE;
  o->window = WINDOW_DEFAULT;
  o->model = TWOFOLD_MODEL_NEGBIN;
  o->level = 0.95;
  o->interval = TWOFOLD_INTERVAL_DEFAULT;
  o->weekday = 1;
  o->min_events = TWOFOLD_MIN_EVENTS_DEFAULT;
  o->threads = default_threads();
  if (tf_cli_input_init(&o->in, argc) != 0)
    return TF_EXIT_OUTPUT;
  int c, st;
  long v;
  opterr = 0;
  while ((c = getopt_long(argc, argv, ":w:m:l:g:a:e" TF_INPUT_SHORT_OPTIONS "sf:o:hV", long_options,
                          NULL)) != -1) {
    st = tf_cli_input_option(c, optarg, &o->in);
    if (st >= 0) {
      if (st > 0)
        return st;
      continue;
    }
    switch (c) {
    case 'w':
      if ((st = tf_cli_parse_long("--window", optarg, 2, WINDOW_MAX, &v)))
        return st;
      o->window = v;
      break;
    case 'm':
      if ((o->model = twofold_model_from_string(optarg)) < 0)
        return tf_cli_usage_error(
            "--model: '%s' is not poisson, quasipoisson or negbin", optarg);
      break;
    case 'l':
      if ((st = tf_cli_parse_double_open("--level", optarg, 0, 1, &o->level)))
        return st;
      break;
    case OPT_INTERVAL:
      if ((o->interval = twofold_interval_from_string(optarg)) < 0)
        return tf_cli_usage_error(
            "--interval: '%s' is not default, wald, profile or small",
            optarg);
      break;
    case OPT_NO_WEEKDAY:
      o->weekday = 0;
      break;
    case OPT_WEEKDAY:
      o->weekday = 1;
      break;
    case OPT_MIN_EVENTS:
      if ((st = tf_cli_parse_long("--min-events", optarg, 0, 1000000000L,
                                  &v)))
        return st;
      o->min_events = (double)v;
      break;
    case OPT_OFFSET:
      if ((st = tf_cli_parse_name("--offset", "column", optarg,
                                  &o->offset)))
        return st;
      break;
    case 'g':
      if ((st = tf_cli_parse_pair("--generation-interval", optarg,
                                  &o->gi_mean, &o->gi_sd)))
        return st;
      o->have_gi = 1;
      break;
    case 'a':
      if ((st = tf_cli_parse_date("--as-of", optarg, &o->as_of)))
        return st;
      o->have_as_of = 1;
      break;
    case 'e':
      o->every_day = 1;
      break;
    case OPT_THREADS:
      if ((st = tf_cli_parse_long("--threads", optarg, 1, THREADS_MAX, &v)))
        return st;
      o->threads = (int)v;
      break;
    case 's':
      o->summary = 1;
      break;
    case OPT_SVG:
      o->svg = optarg;
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
  if (o->summary && (o->every_day || o->have_gi || o->offset))
    return tf_cli_usage_error(
        "--summary describes the input: it takes no --every-day, "
        "--generation-interval or --offset");
  if (o->summary && o->svg)
    return tf_cli_usage_error("--summary takes no --svg");
  return -1;
}

/* ------------------------------------------------------------------ */
/* The rows to report: selected regions, then the total                */
/* ------------------------------------------------------------------ */

struct early_job;

typedef struct target {
  const twofold_series *s; /* borrowed from the set, or the total      */
  size_t col;              /* count column                              */
  int ocol;                /* offset column, or -1                      */
  const struct early_job *pre; /* estimated while reading, or NULL      */
} target;

/* Find the count and offset columns of s; TF_EXIT_DATA if absent
 * (tf_cli_resolve_fn: ctx the options, element a target). */
static int resolve_columns(const void *ctx, const twofold_series *s,
                           void *element) {
  const options *o = ctx;
  target *t = element;
  t->s = s;
  t->col = 0;
  t->ocol = -1;
  t->pre = NULL;
  int st = TF_EXIT_OK;
  if (o->in.count != NULL)
    st = tf_cli_series_column(s, o->in.count, &t->col);
  if (st == TF_EXIT_OK && o->offset != NULL) {
    size_t k;
    if ((st = tf_cli_series_column(s, o->offset, &k)) == TF_EXIT_OK)
      t->ocol = (int)k;
  }
  return st;
}

/* Build the list of targets (tf_cli_targets); *total receives the total
 * series to free. */
static int select_targets(const options *o, const twofold_set *set,
                          twofold_series **total, target **out, size_t *n) {
  void *t = NULL;
  int st = tf_cli_targets(set, TOTAL_LABEL, o->in.regions, o->in.nregions,
                          o->in.no_total, total, sizeof(target),
                          resolve_columns, o, &t, n);
  *out = t;
  return st;
}

/* ------------------------------------------------------------------ */
/* --summary                                                           */
/* ------------------------------------------------------------------ */

static const tf_column summary_cols[] = {
    {"region", TF_ALIGN_LEFT},      {"column", TF_ALIGN_LEFT},
    {"first_date", TF_ALIGN_LEFT},  {"last_date", TF_ALIGN_LEFT},
    {"days", TF_ALIGN_RIGHT},       {"missing_days", TF_ALIGN_RIGHT},
    {"total", TF_ALIGN_RIGHT}};
#define NSUMMARY (sizeof summary_cols / sizeof summary_cols[0])

static int write_summary(tf_writer *w, const target *t) {
  const twofold_series *s = t->s;
  size_t len = twofold_series_length(s);
  int32_t first = twofold_series_first_day(s);
  tf_cell c[NSUMMARY];
  c[0] = tf_cell_str(twofold_series_region(s));
  c[1] = tf_cell_str(twofold_series_column_name(s, t->col));
  c[2] = len ? tf_cell_date(first) : tf_cell_null();
  c[3] = len ? tf_cell_date(first + (int32_t)(len - 1)) : tf_cell_null();
  c[4] = tf_cell_int((long long)len);
  c[5] = tf_cell_int((long long)twofold_series_missing(s, t->col));
  c[6] = tf_cell_dbl(twofold_series_total(s, t->col), 0);
  return tf_writer_row(w, c);
}

/* ------------------------------------------------------------------ */
/* Growth rows                                                         */
/* ------------------------------------------------------------------ */

/* One window's results, as the records show them. */
typedef struct estimate {
  int32_t start, end;
  size_t days, missing;
  double events;
  int status;     /* 0 or the fit's TWOFOLD_E... status              */
  double r, lo, hi;        /* per day; NaN where absent                 */
  double t, t_lo, t_hi;    /* days; INFINITY where unbounded            */
  int sense;               /* +1 doubling, -1 halving, 0 neither        */
  double R, R_lo, R_hi;
} estimate;

/* Work space of one thread: a window, the outputs of
 * twofold_growth_roll for it, and the thread's own options. */
typedef struct work {
  double *y, *off;
  double *rate, *lo, *hi;
  int *status;
  twofold_fit_options *fo;
  twofold_gi *gi;
} work;

static const char *trend_of(const estimate *e, char *buf, size_t size) {
  switch (e->status) {
  case 0:
    if (e->lo > 0)
      return "growing";
    if (e->hi < 0)
      return "shrinking";
    if (isnan(e->lo) || isnan(e->hi))
      return "no clear trend";
    return "no clear trend";
  case TWOFOLD_EZERO:
  case TWOFOLD_EFEWEVENTS:
  case TWOFOLD_ENODATA:
    return "too few counts";
  default:
    return tf_cli_status_name(e->status, buf, size);
  }
}

/* The counts y and offsets off of the window of o->window days ending on
 * day end, and the first part of its estimate e. */
static void fill_window(const options *o, const target *t, int32_t end,
                        double *wy, double *woff, estimate *e) {
  const twofold_series *s = t->s;
  size_t w = (size_t)o->window;
  int32_t first = twofold_series_first_day(s);
  size_t len = twofold_series_length(s);
  const double *v = twofold_series_values(s, t->col);
  const double *ov = t->ocol >= 0 ? twofold_series_values(s, (size_t)t->ocol)
                                  : NULL;
  memset(e, 0, sizeof *e);
  e->end = end;
  e->start = end - (int32_t)w + 1;
  e->days = w;
  e->r = e->lo = e->hi = NAN;
  e->t = e->t_lo = e->t_hi = NAN;
  e->R = e->R_lo = e->R_hi = NAN;
  for (size_t k = 0; k < w; k++) {
    int64_t idx = (int64_t)e->start + (int64_t)k - first;
    double y = NAN, off = 0;
    if (idx >= 0 && (uint64_t)idx < len) {
      y = v[idx];
      if (ov != NULL) {
        /* A day without a positive offset value cannot be fitted. */
        double x = ov[idx];
        if (isnan(x) || !(x > 0))
          y = NAN;
        else
          off = log(x);
      }
    }
    wy[k] = y;
    woff[k] = off;
    if (isnan(y))
      e->missing++;
    else
      e->events += y;
  }
}

/* Fit the window in wk->y and wk->off, whose estimate fill_window began.
 * Returns 0, or a status that is not a property of the data (out of
 * memory, a bug). */
static int fit_window(const options *o, work *wk, estimate *e) {
  size_t w = (size_t)o->window;
  /* One window of twofold_growth_roll: the fit of twofold_growth_fit,
   * but only the interval of the options' kind is computed (not every
   * kind).  The offset is always given (zeros without --offset): the
   * library's fit is then the same general fit as twofold_growth_fit's,
   * with log mu_t + 0 for each day. */
  int rc = twofold_growth_roll(wk->fo, wk->y, wk->off, w,
                               twofold_date_weekday(e->start), w,
                               TWOFOLD_ALIGN_TRAILING, wk->rate, wk->lo,
                               wk->hi, wk->status);
  if (rc != 0)
    return rc;
  rc = wk->status[w - 1];
  if (rc == TWOFOLD_ENOMEM || rc == TWOFOLD_EINVAL)
    return rc;
  e->status = rc;
  if (rc != 0)
    return 0;
  e->r = wk->rate[w - 1];
  e->lo = wk->lo[w - 1];
  e->hi = wk->hi[w - 1];
  if (isfinite(e->lo) && isfinite(e->hi) && isfinite(e->r)) {
    if (twofold_doubling_time(e->r, e->lo, e->hi, &e->t, &e->t_lo, &e->t_hi,
                              &e->sense) != 0)
      e->t = e->t_lo = e->t_hi = NAN;
  }
  if (wk->gi != NULL) {
    if (twofold_gi_reproduction(wk->gi, e->r, &e->R) != 0)
      e->R = NAN;
    if (!isfinite(e->lo) || twofold_gi_reproduction(wk->gi, e->lo, &e->R_lo))
      e->R_lo = NAN;
    if (!isfinite(e->hi) || twofold_gi_reproduction(wk->gi, e->hi, &e->R_hi))
      e->R_hi = NAN;
  }
  return 0;
}

/* Fit the window of o->window days of target t ending on day end. */
static int estimate_window(const options *o, work *wk, const target *t,
                           int32_t end, estimate *e) {
  fill_window(o, t, end, wk->y, wk->off, e);
  return fit_window(o, wk, e);
}

/* Percent change over a week at rate r per day. */
static double weekly(double r) { return isfinite(r) ? 100 * expm1(7 * r) : NAN; }

/* Columns of TSV, CSV and JSON records; the first part of every record,
 * then the reproduction number if asked for, then trend and status. */
static const tf_column growth_cols[] = {
    {"region", TF_ALIGN_LEFT},
    {"column", TF_ALIGN_LEFT},
    {"date", TF_ALIGN_LEFT},
    {"window_start", TF_ALIGN_LEFT},
    {"window_end", TF_ALIGN_LEFT},
    {"days", TF_ALIGN_RIGHT},
    {"days_missing", TF_ALIGN_RIGHT},
    {"events", TF_ALIGN_RIGHT},
    {"model", TF_ALIGN_LEFT},
    {"level", TF_ALIGN_RIGHT},
    {"growth_rate", TF_ALIGN_RIGHT},
    {"growth_rate_lo", TF_ALIGN_RIGHT},
    {"growth_rate_hi", TF_ALIGN_RIGHT},
    {"sense", TF_ALIGN_LEFT},
    {"doubling_time", TF_ALIGN_RIGHT},
    {"doubling_time_lo", TF_ALIGN_RIGHT},
    {"doubling_time_hi", TF_ALIGN_RIGHT},
    {"weekly_change", TF_ALIGN_RIGHT},
    {"weekly_change_lo", TF_ALIGN_RIGHT},
    {"weekly_change_hi", TF_ALIGN_RIGHT},
    {"reproduction", TF_ALIGN_RIGHT},
    {"reproduction_lo", TF_ALIGN_RIGHT},
    {"reproduction_hi", TF_ALIGN_RIGHT},
    {"trend", TF_ALIGN_LEFT},
    {"status", TF_ALIGN_LEFT}};
#define NGROWTH (sizeof growth_cols / sizeof growth_cols[0])
#define GROWTH_R_FIRST 20 /* index of "reproduction" */

/* The aligned table for people has fewer, rounded columns, so that it
 * fits 80 columns with region names of up to 20 characters (see
 * twofold(1)); the interval header is made from the level. */
static size_t record_columns(const options *o, tf_column *cols,
                             char *ci_header, size_t size) {
  size_t n = 0;
  if (o->format != TF_FORMAT_TABLE) {
    for (size_t j = 0; j < NGROWTH; j++)
      if (o->have_gi || j < GROWTH_R_FIRST || j >= GROWTH_R_FIRST + 3)
        cols[n++] = growth_cols[j];
    return n;
  }
  tf_cli_ci_header(ci_header, size, o->level);
  cols[n++] = (tf_column){"region", TF_ALIGN_LEFT};
  cols[n++] = (tf_column){"date", TF_ALIGN_LEFT};
  cols[n++] = (tf_column){"%/day", TF_ALIGN_RIGHT};
  cols[n++] = (tf_column){ci_header, TF_ALIGN_LEFT};
  cols[n++] = (tf_column){"dbl/hlv", TF_ALIGN_RIGHT};
  if (o->have_gi) {
    cols[n++] = (tf_column){"R", TF_ALIGN_RIGHT};
    cols[n++] = (tf_column){ci_header, TF_ALIGN_LEFT};
  }
  cols[n++] = (tf_column){"trend", TF_ALIGN_LEFT};
  return n;
}

static int write_estimate(const options *o, tf_writer *w, const target *t,
                          const estimate *e) {
  tf_cell c[NGROWTH];
  size_t n = 0;
  char sbuf[32], tbuf[32];
  const char *trend = trend_of(e, tbuf, sizeof tbuf);
  const char *region = twofold_series_region(t->s);
  if (o->format == TF_FORMAT_TABLE) {
    char r_ci[80], R_ci[80];
    /* Doubling or halving times only where the trend is clear: when the
     * interval for r holds 0 the data are consistent with no change, and
     * the growth rate, not a time, is the figure to report. */
    int clear = e->status == 0 && (e->lo > 0 || e->hi < 0);
    c[n++] = tf_cell_str(region);
    c[n++] = tf_cell_date(e->end);
    c[n++] = tf_cell_dbl_signed(100 * e->r, 1);
    c[n++] = tf_cell_str(tf_cli_range_text(r_ci, sizeof r_ci, 100 * e->lo,
                                           100 * e->hi, 1, 1));
    c[n++] = clear ? tf_cell_dbl(e->t, 1) : tf_cell_null();
    if (o->have_gi) {
      c[n++] = tf_cell_dbl(e->R, 2);
      c[n++] = tf_cell_str(
          tf_cli_range_text(R_ci, sizeof R_ci, e->R_lo, e->R_hi, 2, 0));
    }
    c[n++] = tf_cell_str(trend);
    return tf_writer_row(w, c);
  }
  c[n++] = tf_cell_str(region);
  c[n++] = tf_cell_str(twofold_series_column_name(t->s, t->col));
  c[n++] = tf_cell_date(e->end);
  c[n++] = tf_cell_date(e->start);
  c[n++] = tf_cell_date(e->end);
  c[n++] = tf_cell_int((long long)e->days);
  c[n++] = tf_cell_int((long long)e->missing);
  c[n++] = tf_cell_dbl(e->events, 0);
  c[n++] = tf_cell_str(twofold_model_to_string(o->model));
  c[n++] = tf_cell_dbl(o->level, -1);
  c[n++] = tf_cell_dbl(100 * e->r, -1);
  c[n++] = tf_cell_dbl(100 * e->lo, -1);
  c[n++] = tf_cell_dbl(100 * e->hi, -1);
  c[n++] = tf_cell_sense(e->sense);
  c[n++] = tf_cell_dbl(e->t, -1);
  c[n++] = tf_cell_dbl(e->t_lo, -1);
  c[n++] = tf_cell_dbl(e->t_hi, -1);
  c[n++] = tf_cell_dbl(weekly(e->r), -1);
  c[n++] = tf_cell_dbl(weekly(e->lo), -1);
  c[n++] = tf_cell_dbl(weekly(e->hi), -1);
  if (o->have_gi) {
    c[n++] = tf_cell_dbl(e->R, -1);
    c[n++] = tf_cell_dbl(e->R_lo, -1);
    c[n++] = tf_cell_dbl(e->R_hi, -1);
  }
  c[n++] = tf_cell_str(trend);
  c[n++] = tf_cell_str(tf_cli_status_name(e->status, sbuf, sizeof sbuf));
  return tf_writer_row(w, c);
}

/* First and last day with a count in column col; 0 if there is none. */
static int present_range(const target *t, int32_t *lo, int32_t *hi) {
  const double *v = twofold_series_values(t->s, t->col);
  size_t len = twofold_series_length(t->s);
  size_t a = 0, b = len;
  while (a < len && isnan(v[a]))
    a++;
  while (b > a && isnan(v[b - 1]))
    b--;
  if (a == b)
    return 0;
  *lo = twofold_series_first_day(t->s) + (int32_t)a;
  *hi = twofold_series_first_day(t->s) + (int32_t)(b - 1);
  return 1;
}

/* The days whose windows target t reports: from .. end. */
static void target_days(const options *o, const target *t, int32_t *from,
                        int32_t *end) {
  int32_t lo = 0, hi = 0;
  int any = present_range(t, &lo, &hi);
  *end = o->have_as_of ? o->as_of : hi;
  if (!any && !o->have_as_of) {
    /* No count at all: one row says so. */
    *end = twofold_series_length(t->s) > 0
               ? twofold_series_first_day(t->s) +
                     (int32_t)(twofold_series_length(t->s) - 1)
               : 0;
  }
  *from = *end;
  if (o->every_day && any) {
    *from = lo + (int32_t)o->window - 1;
    if (*from > *end)
      *from = *end;
  }
}

static int work_init(const options *o, work *wk) {
  memset(wk, 0, sizeof *wk);
  size_t w = (size_t)o->window;
  wk->y = malloc(w * sizeof *wk->y);
  wk->off = malloc(w * sizeof *wk->off);
  wk->rate = malloc(w * sizeof *wk->rate);
  wk->lo = malloc(w * sizeof *wk->lo);
  wk->hi = malloc(w * sizeof *wk->hi);
  wk->status = malloc(w * sizeof *wk->status);
  if (wk->y == NULL || wk->off == NULL || wk->rate == NULL ||
      wk->lo == NULL || wk->hi == NULL || wk->status == NULL)
    return TWOFOLD_ENOMEM;
  int rc = twofold_fit_options_new(&wk->fo);
  if (rc == 0)
    rc = twofold_fit_options_set_model(wk->fo, o->model);
  if (rc == 0)
    rc = twofold_fit_options_set_level(wk->fo, o->level);
  if (rc == 0)
    rc = twofold_fit_options_set_weekday(wk->fo, o->weekday);
  if (rc == 0)
    rc = twofold_fit_options_set_interval(wk->fo, o->interval);
  if (rc == 0)
    rc = twofold_fit_options_set_min_events(wk->fo, o->min_events);
  if (rc == 0 && o->have_gi)
    rc = twofold_gi_new_gamma(o->gi_mean, o->gi_sd, &wk->gi);
  return rc;
}

static void work_free(work *wk) {
  free(wk->y);
  free(wk->off);
  free(wk->rate);
  free(wk->lo);
  free(wk->hi);
  free(wk->status);
  twofold_fit_options_free(wk->fo);
  twofold_gi_free(wk->gi);
}

/* ------------------------------------------------------------------ */
/* Estimates made while the input is read                              */
/* ------------------------------------------------------------------ */

/* In a long file sorted by region the reader hands over each region as
 * soon as its rows are complete (twofold_read_options_set_region_fn), and
 * the workers fit its last window while the rest of the file is read.
 * Whatever the order of the input, the set read in the end decides: a
 * target uses the early estimate only if its window holds the same
 * values (early_holds), so the output is that of fitting after reading. */
/* Workers wait until this many regions are queued (or the input is
 * read): fewer wake-ups than one a region. */
#define EARLY_WAKE 64

typedef struct early_job {
  int state;       /* 0 waiting, 1 estimated, 2 failed: fit again      */
  estimate e;
  double *y, *off; /* the window fitted (o->window days each)           */
  double data[];
} early_job;

typedef struct early {
  const options *o;
  work *wk;
  pthread_mutex_t mu;
  pthread_cond_t cv;
  early_job **jobs; /* by region index; NULL where none               */
  size_t cap;       /* slots in jobs                                    */
  size_t *queue;    /* region indices to fit, in the order handed over  */
  size_t n, qcap, next;
  int closing; /* the input is read: workers finish the queue and stop */
  int broken;  /* out of memory: no more early estimates               */
  pthread_t tid[THREADS_MAX];
  int started;
} early;

/* Whether the estimate made while reading holds for target t's window
 * ending on day end: the same counts and offsets, bit for bit, give the
 * same fit.  Fills wk->y, wk->off and e on the way. */
static int early_holds(const options *o, work *wk, const target *t,
                       int32_t end, estimate *e) {
  const early_job *j = t->pre;
  size_t w = (size_t)o->window;
  if (j->state != 1 || j->e.end != end)
    return 0;
  fill_window(o, t, end, wk->y, wk->off, e);
  if (memcmp(wk->y, j->y, w * sizeof *wk->y) != 0 ||
      memcmp(wk->off, j->off, w * sizeof *wk->off) != 0)
    return 0;
  *e = j->e;
  return 1;
}

static void *early_main(void *arg) {
  early *ea = ((void **)arg)[0];
  work *wk = ((void **)arg)[1];
  size_t w = (size_t)ea->o->window;
  for (;;) {
    pthread_mutex_lock(&ea->mu);
    while (ea->n - ea->next < EARLY_WAKE && !ea->closing)
      pthread_cond_wait(&ea->cv, &ea->mu);
    if (ea->next == ea->n) {
      pthread_mutex_unlock(&ea->mu);
      return NULL;
    }
    early_job *j = ea->jobs[ea->queue[ea->next++]];
    pthread_mutex_unlock(&ea->mu);
    memcpy(wk->y, j->y, w * sizeof *wk->y);
    memcpy(wk->off, j->off, w * sizeof *wk->off);
    j->state = fit_window(ea->o, wk, &j->e) == 0 ? 1 : 2;
  }
}

/* twofold_read_region_fn: queue the last window of region s (index in
 * the set) for the workers. */
static void early_region(void *arg, size_t index, const twofold_series *s) {
  early *ea = arg;
  const options *o = ea->o;
  if (ea->broken)
    return;
  target t;
  t.s = s;
  t.col = 0;
  t.ocol = -1;
  t.pre = NULL;
  if (o->in.count != NULL) {
    int k = twofold_series_column_index(s, o->in.count);
    if (k < 0)
      return; /* the final pass says so */
    t.col = (size_t)k;
  }
  if (o->offset != NULL) {
    int k = twofold_series_column_index(s, o->offset);
    if (k < 0)
      return;
    t.ocol = k;
  }
  size_t w = (size_t)o->window;
  early_job *j = malloc(sizeof *j + 2 * w * sizeof(double));
  if (j == NULL) {
    ea->broken = 1;
    return;
  }
  j->state = 0;
  j->y = j->data;
  j->off = j->data + w;
  int32_t from, end;
  target_days(o, &t, &from, &end);
  fill_window(o, &t, end, j->y, j->off, &j->e);
  pthread_mutex_lock(&ea->mu);
  if (index >= ea->cap || ea->n == ea->qcap) {
    size_t cap = index >= ea->cap ? 2 * index + 64 : ea->cap;
    size_t qcap = ea->n == ea->qcap ? 2 * ea->qcap + 64 : ea->qcap;
    early_job **jobs = realloc(ea->jobs, cap * sizeof *jobs);
    if (jobs != NULL) {
      for (size_t i = ea->cap; i < cap; i++)
        jobs[i] = NULL;
      ea->jobs = jobs;
      ea->cap = cap;
    }
    size_t *queue = jobs != NULL ? realloc(ea->queue, qcap * sizeof *queue)
                                 : NULL;
    if (queue != NULL) {
      ea->queue = queue;
      ea->qcap = qcap;
    }
    if (jobs == NULL || queue == NULL) {
      ea->broken = 1;
      pthread_mutex_unlock(&ea->mu);
      free(j);
      return;
    }
  }
  if (ea->jobs[index] != NULL) { /* not expected: keep the first */
    pthread_mutex_unlock(&ea->mu);
    free(j);
    return;
  }
  ea->jobs[index] = j;
  ea->queue[ea->n++] = index;
  if (ea->n - ea->next == EARLY_WAKE)
    pthread_cond_signal(&ea->cv);
  pthread_mutex_unlock(&ea->mu);
}

/* Start nw workers, with the work spaces wk; 0 if none could start (no
 * early estimates then). */
static int early_start(early *ea, const options *o, work *wk, int nw,
                       void *args[][2]) {
  memset(ea, 0, sizeof *ea);
  ea->o = o;
  ea->wk = wk;
  if (pthread_mutex_init(&ea->mu, NULL) != 0)
    return 0;
  if (pthread_cond_init(&ea->cv, NULL) != 0) {
    pthread_mutex_destroy(&ea->mu);
    return 0;
  }
  for (int k = 0; k < nw; k++) {
    args[k][0] = ea;
    args[k][1] = &wk[k];
    if (pthread_create(&ea->tid[k], NULL, early_main, args[k]) != 0)
      break;
    ea->started++;
  }
  if (ea->started == 0) {
    pthread_cond_destroy(&ea->cv);
    pthread_mutex_destroy(&ea->mu);
  }
  return ea->started;
}

/* Let the workers finish the queue, and join them. */
static void early_finish(early *ea) {
  if (ea->started == 0)
    return;
  pthread_mutex_lock(&ea->mu);
  ea->closing = 1;
  pthread_cond_broadcast(&ea->cv);
  pthread_mutex_unlock(&ea->mu);
  for (int k = 0; k < ea->started; k++)
    pthread_join(ea->tid[k], NULL);
  pthread_cond_destroy(&ea->cv);
  pthread_mutex_destroy(&ea->mu);
  ea->started = 0;
}

static void early_free(early *ea) {
  early_finish(ea);
  for (size_t i = 0; i < ea->cap; i++)
    free(ea->jobs[i]);
  free(ea->jobs);
  free(ea->queue);
  ea->jobs = NULL;
  ea->queue = NULL;
  ea->cap = 0;
}

/* ------------------------------------------------------------------ */
/* Regions on several threads                                          */
/* ------------------------------------------------------------------ */

/* The estimates of one target, computed by any thread and written by the
 * main thread in input order: the output does not depend on the number of
 * threads or on which thread computed what. */
typedef struct result {
  estimate *e; /* n windows, days from .. from+n-1                    */
  size_t n;
  size_t done; /* windows estimated (< n after a failure)              */
  int rc;      /* 0, or the failure after `done` windows               */
} result;

/* A batch: targets first .. first+n-1, handed out one at a time. */
typedef struct batch {
  const options *o;
  const target *targets;
  result *res; /* n, indexed from first                              */
  size_t first, n;
  pthread_mutex_t lock;
  size_t next;
} batch;

typedef struct worker {
  batch *b;
  work *wk;
  pthread_t tid;
} worker;

static void estimate_target(const options *o, work *wk, const target *t,
                            result *r) {
  int32_t from, end;
  target_days(o, t, &from, &end);
  if (r->n == 1 && t->pre != NULL && early_holds(o, wk, t, from, &r->e[0])) {
    r->done = 1;
    return;
  }
  for (r->done = 0; r->done < r->n; r->done++) {
    int rc = estimate_window(o, wk, t, from + (int32_t)r->done,
                             &r->e[r->done]);
    if (rc != 0) {
      r->rc = rc;
      return;
    }
  }
}

static void *worker_main(void *arg) {
  worker *wr = arg;
  batch *b = wr->b;
  for (;;) {
    pthread_mutex_lock(&b->lock);
    size_t i = b->next;
    if (i < b->n)
      b->next++;
    pthread_mutex_unlock(&b->lock);
    if (i >= b->n)
      return NULL;
    estimate_target(b->o, wr->wk, &b->targets[b->first + i], &b->res[i]);
  }
}

/* Size the batch of targets from `first` (at most BATCH_WINDOWS windows,
 * at least one target) and allocate its results; 0 or TWOFOLD_ENOMEM. */
static int batch_alloc(const options *o, const target *targets,
                       size_t ntargets, size_t first, batch *b) {
  b->o = o;
  b->targets = targets;
  b->first = first;
  b->next = 0;
  size_t windows = 0, n = 0;
  while (first + n < ntargets) {
    int32_t from, end;
    target_days(o, &targets[first + n], &from, &end);
    size_t k = (size_t)((int64_t)end - from + 1);
    if (n > 0 && (windows + k > BATCH_WINDOWS || n == BATCH_TARGETS))
      break;
    windows += k;
    n++;
  }
  b->n = n;
  b->res = calloc(n ? n : 1, sizeof *b->res);
  estimate *e = malloc((windows ? windows : 1) * sizeof *e);
  if (b->res == NULL || e == NULL) {
    free(b->res);
    free(e);
    b->res = NULL;
    return TWOFOLD_ENOMEM;
  }
  for (size_t i = 0; i < n; i++) {
    int32_t from, end;
    target_days(o, &targets[first + i], &from, &end);
    b->res[i].e = e;
    b->res[i].n = (size_t)((int64_t)end - from + 1);
    e += b->res[i].n;
  }
  return 0;
}

static void batch_free(batch *b) {
  if (b->res != NULL)
    free(b->res[0].e);
  free(b->res);
  b->res = NULL;
}

/* Start the batch on the workers (nw of them, with their own work);
 * returns the number of threads started (0: the caller computes it). */
static int batch_start(batch *b, worker *wr, work *wk, int nw) {
  if (nw <= 1 || pthread_mutex_init(&b->lock, NULL) != 0)
    return 0;
  int started = 0;
  for (int k = 0; k < nw && (size_t)k < b->n; k++) {
    wr[k].b = b;
    wr[k].wk = &wk[k];
    if (pthread_create(&wr[k].tid, NULL, worker_main, &wr[k]) != 0)
      break;
    started++;
  }
  if (started == 0)
    pthread_mutex_destroy(&b->lock);
  return started;
}

static void batch_finish(batch *b, worker *wr, work *wk, int started) {
  if (started == 0) {
    for (size_t i = 0; i < b->n; i++)
      estimate_target(b->o, &wk[0], &b->targets[b->first + i], &b->res[i]);
    return;
  }
  for (int k = 0; k < started; k++)
    pthread_join(wr[k].tid, NULL);
  pthread_mutex_destroy(&b->lock);
}

/* Write a computed batch; TF_EXIT_OK, -1 (write error) or an exit
 * status after a failed estimate. */
static int batch_write(const options *o, tf_writer *w, const batch *b) {
  for (size_t i = 0; i < b->n; i++) {
    const result *r = &b->res[i];
    const target *t = &b->targets[b->first + i];
    for (size_t k = 0; k < r->done; k++)
      if (write_estimate(o, w, t, &r->e[k]) != 0)
        return -1;
    if (r->rc != 0) {
      tf_cli_msg("%s: %s", twofold_series_region(t->s),
                 r->rc == TWOFOLD_ENOMEM ? "out of memory"
                                         : twofold_strerror(r->rc));
      return TF_EXIT_OUTPUT;
    }
  }
  return TF_EXIT_OK;
}

/* Estimate and write every target: batches of targets computed on the
 * threads while the previous batch is written. */
static int write_growth(const options *o, work *wk, int nw, tf_writer *w,
                        const target *targets, size_t ntargets) {
  worker *wr = calloc((size_t)nw, sizeof *wr);
  batch cur, prev;
  memset(&cur, 0, sizeof cur);
  memset(&prev, 0, sizeof prev);
  int have_prev = 0;
  int st = TF_EXIT_OK;
  if (wr == NULL) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  size_t next = 0;
  while (st == TF_EXIT_OK && (next < ntargets || have_prev)) {
    int started = -1;
    if (next < ntargets) {
      if (batch_alloc(o, targets, ntargets, next, &cur) != 0) {
        tf_cli_msg("out of memory");
        st = TF_EXIT_OUTPUT;
        break;
      }
      next += cur.n;
      started = batch_start(&cur, wr, wk, nw);
    }
    if (have_prev) {
      st = batch_write(o, w, &prev);
      batch_free(&prev);
      have_prev = 0;
    }
    if (started >= 0) {
      batch_finish(&cur, wr, wk, started);
      prev = cur;
      memset(&cur, 0, sizeof cur);
      have_prev = 1;
    }
  }
  batch_free(&prev);
  free(wr);
  return st;
}

/* ------------------------------------------------------------------ */
/* main                                                                */
/* ------------------------------------------------------------------ */

static int run(const options *o, char **files, size_t nfiles) {
  static char *stdin_only[] = {(char *)"-"};
  int stdin_seen = 0;
  for (size_t i = 0; i < nfiles; i++)
    if (strcmp(files[i], "-") == 0 && stdin_seen++)
      return tf_cli_usage_error("standard input ('-') named twice");
  if (nfiles == 0) {
    files = stdin_only;
    nfiles = 1;
  }

  twofold_read_options *ro = NULL;
  twofold_set *set = NULL;
  twofold_series *total = NULL;
  target *targets = NULL;
  size_t ntargets = 0;
  tf_output *out = NULL;
  tf_writer *w = NULL;
  work *wk = NULL;
  int nw = 0;
  int st;
  early ea;
  void *eargs[THREADS_MAX][2];
  memset(&ea, 0, sizeof ea);

  if ((st = tf_cli_input_read_options(&o->in, &ro)) != 0)
    goto done;
  /* The latest estimate of every region of one file: fit regions while
   * the file is read (see early_region), with the work spaces made now.
   * If they cannot be made, the work spaces are made after reading, as
   * without this, and any message comes at the same point. */
  if (!o->summary && !o->every_day && o->in.nregions == 0 && nfiles == 1) {
    nw = o->threads;
    wk = calloc((size_t)nw, sizeof *wk);
    int ok = wk != NULL;
    for (int k = 0; ok && k < nw; k++)
      ok = work_init(o, &wk[k]) == 0;
    if (ok && early_start(&ea, o, wk, nw, eargs) > 0)
      ok = twofold_read_options_set_region_fn(ro, early_region, &ea) == 0;
    else
      ok = 0;
    if (!ok) {
      early_free(&ea);
      for (int k = 0; wk != NULL && k < nw; k++)
        work_free(&wk[k]);
      free(wk);
      wk = NULL;
      nw = 0;
    }
  }
  st = tf_cli_read_inputs(files, nfiles, ro, &set);
  early_finish(&ea);
  if (st != TF_EXIT_OK)
    goto done;
  if ((st = select_targets(o, set, &total, &targets, &ntargets)) !=
      TF_EXIT_OK)
    goto done;
  for (size_t i = 0; i < ntargets && i < ea.cap; i++)
    if (targets[i].s == twofold_set_at(set, i))
      targets[i].pre = ea.jobs[i];
  if (!o->summary && wk == NULL) {
    /* One work space, with its own options, per thread. */
    nw = o->threads;
    if ((size_t)nw > ntargets)
      nw = ntargets ? (int)ntargets : 1;
    if ((wk = calloc((size_t)nw, sizeof *wk)) == NULL) {
      tf_cli_msg("out of memory");
      st = TF_EXIT_OUTPUT;
      nw = 0;
      goto done;
    }
    for (int k = 0; k < nw; k++) {
      int rc = work_init(o, &wk[k]);
      if (rc != 0) {
        tf_cli_msg("%s", twofold_strerror(rc));
        st = rc == TWOFOLD_ENOMEM ? TF_EXIT_OUTPUT : TF_EXIT_USAGE;
        goto done;
      }
    }
  }

  /* The chart (chart.c), written whole before the records. */
  if (o->svg != NULL) {
    tf_chart *ch = tf_chart_new(wk[0].fo, (size_t)o->window, o->level,
                                o->have_as_of, o->as_of);
    for (size_t i = 0; ch != NULL && i < ntargets; i++)
      tf_chart_add(ch, targets[i].s, targets[i].col, targets[i].ocol,
                   targets[i].s == total);
    st = ch != NULL ? tf_chart_write(ch, o->svg) : TF_EXIT_OUTPUT;
    tf_chart_free(ch);
    if (st != TF_EXIT_OK)
      goto done;
  }

  /* Only now, with the input read, open the output. */
  if ((out = tf_output_open(o->output)) == NULL) {
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  tf_column cols[NGROWTH];
  char ci_header[48];
  size_t ncols;
  if (o->summary) {
    memcpy(cols, summary_cols, sizeof summary_cols);
    ncols = NSUMMARY;
  } else {
    ncols = record_columns(o, cols, ci_header, sizeof ci_header);
  }
  w = tf_writer_new(tf_output_stream(out), o->format, cols, ncols);
  if (w == NULL) {
    tf_cli_msg("out of memory");
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  if (o->summary) {
    for (size_t i = 0; i < ntargets && st == TF_EXIT_OK; i++)
      st = write_summary(w, &targets[i]) == 0 ? TF_EXIT_OK : -1;
  } else {
    st = write_growth(o, wk, nw, w, targets, ntargets);
  }
  st = tf_output_end(&out, w, st, o->output);
done:
  early_free(&ea);
  tf_output_abort(out);
  tf_writer_free(w);
  for (int k = 0; k < nw; k++)
    work_free(&wk[k]);
  free(wk);
  free(targets);
  twofold_series_free(total);
  twofold_set_free(set);
  twofold_read_options_free(ro);
  return st;
}

int main(int argc, char **argv) {
  tf_cli_set_program(PROGRAM);
  options o;
  int st = parse_args(argc, argv, &o);
  if (st < 0)
    st = run(&o, argv + optind, (size_t)(argc - optind));
  tf_cli_input_free(&o.in);
  return st;
}
