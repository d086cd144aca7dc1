/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * twofold-alert - rules over the latest data of every region, for jobs.
 *
 * For each region, and for their sum, compute the changepoint posterior of
 * libtwofold(3) (offline, on the days up to the latest) and evaluate three
 * rules on its last days:
 *   upturn    a change in the growth rate within the last --recent days
 *             with probability >= --break-prob, the growth rate on the
 *             latest day above the one before those days;
 *   growth    P(growth rate > 0) on the latest day >= --growth-prob;
 *   doubling  the lower end of the growth rate's credible interval on the
 *             latest day is positive and doubles the counts in fewer than
 *             --doubling-days days.
 * One line per region and rule met; the exit status says whether any was
 * met.  See twofold-alert(1).
 */
#include "breaks-common.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define PROGRAM "twofold-alert"

/* The command's own exit statuses: "flagged" takes 1, so the scaffold's
 * "requested region or column absent" moves to 5 (twofold-alert(1)). */
enum {
  AL_EXIT_NOTHING = 0,
  AL_EXIT_FLAGGED = 1,
  AL_EXIT_DATA = 5
};

/* The rules' defaults (the command's own; see twofold-alert(1)). */
#define RECENT_DEFAULT 14
#define BREAK_PROB_DEFAULT 0.8
#define GROWTH_PROB_DEFAULT 0.95
#define DOUBLING_DAYS_DEFAULT 14.0
/* Posterior draws for the latest day's growth rate, and their seed. */
#define DRAWS_DEFAULT 400
#define DRAWS_MAX 100000
#define SEED_DEFAULT 1

enum { RULE_UPTURN = 0, RULE_GROWTH, RULE_DOUBLING, NRULES };
static const char *const rule_names[NRULES] = {"upturn", "growth",
                                               "doubling"};

enum { FORMAT_TEXT = 0, FORMAT_JSON = 1 };

typedef struct options {
  int format;
  const char *output;
  int all;
  int rules[NRULES];
  long recent;
  double break_prob, growth_prob, doubling_days;
  int have_since;
  int32_t since;
  long draws;
  unsigned long long seed;
  bk_model model;
  bk_input in;
} options;

static int usage(FILE *f) {
  fprintf(f,
          "Usage: %s [OPTION]... [FILE]...\n"
          "Evaluate alert rules on the latest days of each region of the "
          "CSV FILEs\n"
          "(plain or gzip; '-' or none: standard input) and of their sum, "
          "labelled\n" BK_TOTAL_LABEL
          ", and print one line for each region and rule met.\n"
          "\n"
          "Rules:\n"
          "      --rules=LIST           rules to evaluate, comma-separated "
          "(default\n"
          "                             upturn,growth,doubling)\n"
          "                upturn:   a change in growth within the last "
          "--recent days\n"
          "                          with P >= --break-prob, growth now "
          "above before\n"
          "                growth:   P(growth rate > 0) on the latest day >= "
          "--growth-prob\n"
          "                doubling: even the interval's low growth rate "
          "doubles the\n"
          "                          counts in under --doubling-days days\n"
          "      --recent=DAYS          days counted as recent (default %d)\n"
          "      --break-prob=P         upturn threshold (default %g)\n"
          "      --growth-prob=P        growth threshold (default %g)\n"
          "      --doubling-days=D      doubling threshold, days (default "
          "%g)\n"
          "      --since=DATE           no upturn whose change is most "
          "probably before\n"
          "                             DATE (reported already)\n"
          "      --all                  a line for every region and rule, "
          "met or not\n"
          "      --draws=N              posterior draws for the latest "
          "growth rate\n"
          "                             (default %d)\n"
          "      --seed=S               their seed (default %d)\n"
          "\n",
          PROGRAM, RECENT_DEFAULT, BREAK_PROB_DEFAULT, GROWTH_PROB_DEFAULT,
          DOUBLING_DAYS_DEFAULT, DRAWS_DEFAULT, SEED_DEFAULT);
  int st = bk_print_model_help(f);
  if (st != 0)
    return st;
  bk_print_input_help(f);
  fputs("Output:\n"
        "  -f, --format=FORMAT        text or json (JSON Lines) (default "
        "text)\n"
        "  -o, --output=FILE          write FILE whole or not at all\n"
        "  -h, --help                 show this help and exit\n"
        "  -V, --version              show the version and exit\n"
        "\n"
        "Exit status: 0 no rule met, 1 a rule met, 2 usage error, 3 "
        "unreadable or\n"
        "malformed input, 4 output error, 5 a requested region or column "
        "is absent.\n"
        "Alerts are prompts for a human look, not decisions; defer to your "
        "local\n"
        "public-health authority.  See twofold-alert(1).\n",
        f);
  return 0;
}

enum {
  OPT_RULES = BK_OPT_LAST_ + 1,
  OPT_RECENT,
  OPT_BREAK_PROB,
  OPT_GROWTH_PROB,
  OPT_DOUBLING_DAYS,
  OPT_SINCE,
  OPT_ALL,
  OPT_DRAWS,
  OPT_SEED
};

static const struct option long_options[] = {
    BK_LONG_OPTIONS,
    {"rules", required_argument, NULL, OPT_RULES},
    {"recent", required_argument, NULL, OPT_RECENT},
    {"break-prob", required_argument, NULL, OPT_BREAK_PROB},
    {"growth-prob", required_argument, NULL, OPT_GROWTH_PROB},
    {"doubling-days", required_argument, NULL, OPT_DOUBLING_DAYS},
    {"since", required_argument, NULL, OPT_SINCE},
    {"all", no_argument, NULL, OPT_ALL},
    {"draws", required_argument, NULL, OPT_DRAWS},
    {"seed", required_argument, NULL, OPT_SEED},
    {"format", required_argument, NULL, 'f'},
    {"output", required_argument, NULL, 'o'},
    {"help", no_argument, NULL, 'h'},
    {"version", no_argument, NULL, 'V'},
    {NULL, 0, NULL, 0}};

static int parse_rules(const char *arg, int *rules) {
  for (int r = 0; r < NRULES; r++)
    rules[r] = 0;
  const char *p = arg;
  for (;;) {
    const char *comma = strchr(p, ',');
    size_t len = comma ? (size_t)(comma - p) : strlen(p);
    int found = -1;
    for (int r = 0; r < NRULES; r++)
      if (strlen(rule_names[r]) == len && strncmp(p, rule_names[r], len) == 0)
        found = r;
    if (found < 0)
      return tf_cli_usage_error(
          "--rules: '%.*s' is not upturn, growth or doubling", (int)len, p);
    rules[found] = 1;
    if (comma == NULL)
      break;
    p = comma + 1;
  }
  return 0;
}

/* Parse the command line; returns -1 to go on, or an exit status. */
static int parse_args(int argc, char **argv, options *o) {
  memset(o, 0, sizeof *o);
  o->format = FORMAT_TEXT;
  for (int r = 0; r < NRULES; r++)
    o->rules[r] = 1;
  o->recent = RECENT_DEFAULT;
  o->break_prob = BREAK_PROB_DEFAULT;
  o->growth_prob = GROWTH_PROB_DEFAULT;
  o->doubling_days = DOUBLING_DAYS_DEFAULT;
  o->draws = DRAWS_DEFAULT;
  o->seed = SEED_DEFAULT;
  if (bk_input_init(&o->in, argc) != 0)
    return TF_EXIT_OUTPUT;
  int c, st;
  opterr = 0;
  while ((c = getopt_long(argc, argv, ":" BK_SHORT_OPTIONS "f:o:hV",
                          long_options, NULL)) != -1) {
    st = bk_parse_option(c, optarg, &o->model, &o->in);
    if (st >= 0) {
      if (st > 0)
        return st;
      continue;
    }
    long v;
    switch (c) {
    case OPT_RULES:
      if ((st = parse_rules(optarg, o->rules)))
        return st;
      break;
    case OPT_RECENT:
      if ((st = tf_cli_parse_long("--recent", optarg, 1, 3660, &v)))
        return st;
      o->recent = v;
      break;
    case OPT_BREAK_PROB:
      if ((st = tf_cli_parse_double_open("--break-prob", optarg, 0, 1,
                                         &o->break_prob)))
        return st;
      break;
    case OPT_GROWTH_PROB:
      if ((st = tf_cli_parse_double_open("--growth-prob", optarg, 0, 1,
                                         &o->growth_prob)))
        return st;
      break;
    case OPT_DOUBLING_DAYS:
      if ((st = tf_cli_parse_double_open("--doubling-days", optarg, 0, 1e6,
                                         &o->doubling_days)))
        return st;
      break;
    case OPT_SINCE:
      if ((st = tf_cli_parse_date("--since", optarg, &o->since)))
        return st;
      o->have_since = 1;
      break;
    case OPT_ALL:
      o->all = 1;
      break;
    case OPT_DRAWS:
      if ((st = tf_cli_parse_long("--draws", optarg, 10, DRAWS_MAX, &v)))
        return st;
      o->draws = v;
      break;
    case OPT_SEED:
      if ((st = tf_cli_parse_long("--seed", optarg, 0, 2147483647L, &v)))
        return st;
      o->seed = (unsigned long long)v;
      break;
    case 'f':
      if (strcmp(optarg, "text") == 0)
        o->format = FORMAT_TEXT;
      else if (strcmp(optarg, "json") == 0)
        o->format = FORMAT_JSON;
      else
        return tf_cli_usage_error("--format: '%s' is not text or json",
                                  optarg);
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
/* Rules                                                               */
/* ------------------------------------------------------------------ */

enum { RES_CLEAR = 0, RES_FLAGGED, RES_SUPPRESSED, RES_STATUS };

/* The evidence of one rule on one region. */
typedef struct verdict {
  int rule;
  int result;         /* RES_... */
  int32_t date;       /* latest day */
  size_t recent;      /* days in the recent window */
  double probability; /* the rule's probability */
  int have_break;
  int32_t break_date;
  double before, after, after_lo, after_hi; /* per day */
  int sense;
  double dt, dt_lo, dt_hi;
} verdict;

/* The latest day's growth rate from posterior draws (exact sampling of
 * segmentations, libtwofold(3) twofold_changes_sample): near the end of a
 * series a change in the last days is possible, which gives the posterior
 * of the growth rate heavy tails that a normal approximation misses. */
typedef struct latest {
  size_t last, w0, k;    /* latest day, first day of the recent window */
  double before;         /* mean growth rate on day w0 - 1             */
  double mean, lo, hi;   /* on the latest day; equal-tailed interval   */
  double p_pos;          /* P(r > 0)                                   */
  double p_fast;         /* P(r > ln 2 / --doubling-days)              */
} latest;

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* Quantile q of sorted v[0..m-1], linear between order statistics
 * (Hyndman & Fan 1996, The American Statistician 50:361-365, type 7). */
static double quantile(const double *v, size_t m, double q) {
  double h = (double)(m - 1) * q;
  size_t i = (size_t)floor(h);
  if (i + 1 >= m)
    return v[m - 1];
  return v[i] + (h - (double)i) * (v[i + 1] - v[i]);
}

static int latest_of(const options *o, const bk_fit *f, latest *L) {
  memset(L, 0, sizeof *L);
  size_t n = f->n, D = (size_t)o->draws;
  L->last = n - 1;
  L->k = (size_t)o->recent < L->last ? (size_t)o->recent : L->last;
  L->w0 = n - L->k; /* >= 1 */
  double *rate = malloc(D * n * sizeof *rate);
  double *r = malloc(D * sizeof *r);
  if (rate == NULL || r == NULL) {
    free(rate);
    free(r);
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  int rc = twofold_changes_sample(f->ch, (uint64_t)o->seed, D, NULL, rate,
                                  NULL);
  if (rc != 0) {
    free(rate);
    free(r);
    tf_cli_msg("%s: %s", twofold_series_region(f->t->s),
               rc == TWOFOLD_ENOMEM ? "out of memory" : twofold_strerror(rc));
    return TF_EXIT_OUTPUT;
  }
  double rmin = log(2.0) / o->doubling_days, sb = 0, sm = 0;
  size_t pos = 0, fast = 0;
  for (size_t d = 0; d < D; d++) {
    r[d] = rate[d * n + L->last];
    sb += rate[d * n + L->w0 - 1];
    sm += r[d];
    pos += r[d] > 0;
    fast += r[d] > rmin;
  }
  L->before = sb / (double)D;
  L->mean = sm / (double)D;
  L->p_pos = (double)pos / (double)D;
  L->p_fast = (double)fast / (double)D;
  qsort(r, D, sizeof *r, cmp_double);
  L->lo = quantile(r, D, (1 - f->level) / 2);
  L->hi = quantile(r, D, (1 + f->level) / 2);
  free(rate);
  free(r);
  return 0;
}

/* Doubling (r > 0) or halving (r < 0) time ln 2 / |r| and its interval
 * mapped from [lo, hi], unbounded (INFINITY) where the interval reaches
 * 0; the convention of twofold(1) and libtwofold(3). */
static void doubling_of(double r, double lo, double hi, verdict *v) {
  const double ln2 = log(2.0);
  v->sense = r > 0 ? 1 : r < 0 ? -1 : 0;
  if (v->sense > 0) {
    v->dt = ln2 / r;
    v->dt_lo = hi > 0 ? ln2 / hi : INFINITY;
    v->dt_hi = lo > 0 ? ln2 / lo : INFINITY;
  } else if (v->sense < 0) {
    v->dt = ln2 / -r;
    v->dt_lo = lo < 0 ? ln2 / -lo : INFINITY;
    v->dt_hi = hi < 0 ? ln2 / -hi : INFINITY;
  }
}

static void evaluate(const options *o, const bk_fit *f, const latest *L,
                     int rule, verdict *v) {
  memset(v, 0, sizeof *v);
  v->rule = rule;
  v->probability = v->before = v->after = v->after_lo = v->after_hi = NAN;
  v->dt = v->dt_lo = v->dt_hi = NAN;
  if (f->status != 0) {
    v->result = RES_STATUS;
    if (f->n)
      v->date = f->first_day + (int32_t)(f->n - 1);
    return;
  }
  v->date = f->first_day + (int32_t)L->last;
  v->recent = L->k;
  v->before = L->before;
  v->after = L->mean;
  v->after_lo = L->lo;
  v->after_hi = L->hi;
  doubling_of(L->mean, L->lo, L->hi, v);
  switch (rule) {
  case RULE_UPTURN: {
    double sum = 0, best = -1;
    size_t at = L->w0;
    for (size_t i = L->w0; i <= L->last; i++) {
      sum += f->p[i];
      if (f->p[i] > best) {
        best = f->p[i];
        at = i;
      }
    }
    v->probability = sum > 1 ? 1 : sum;
    v->have_break = 1;
    v->break_date = f->first_day + (int32_t)at;
    v->result = v->probability >= o->break_prob && v->after > v->before
                    ? RES_FLAGGED
                    : RES_CLEAR;
    if (v->result == RES_FLAGGED && o->have_since &&
        v->break_date < o->since)
      v->result = RES_SUPPRESSED;
    break;
  }
  case RULE_GROWTH:
    v->probability = L->p_pos;
    v->result = v->probability >= o->growth_prob ? RES_FLAGGED : RES_CLEAR;
    break;
  default: /* RULE_DOUBLING */
    v->probability = L->p_fast;
    v->result = v->sense > 0 && v->dt_hi < o->doubling_days ? RES_FLAGGED
                                                            : RES_CLEAR;
    break;
  }
}

static const char *result_name(const verdict *v, const bk_fit *f, char *buf,
                               size_t size) {
  switch (v->result) {
  case RES_FLAGGED:
    return "flagged";
  case RES_SUPPRESSED:
    return "suppressed";
  case RES_CLEAR:
    return "clear";
  default:
    return tf_cli_status_name(f->status, buf, size);
  }
}

static const tf_column json_cols[] = {
    {"rule", TF_ALIGN_LEFT},           {"region", TF_ALIGN_LEFT},
    {"column", TF_ALIGN_LEFT},         {"date", TF_ALIGN_LEFT},
    {"result", TF_ALIGN_LEFT},         {"probability", TF_ALIGN_RIGHT},
    {"recent_days", TF_ALIGN_RIGHT},   {"break_date", TF_ALIGN_LEFT},
    {"growth_before", TF_ALIGN_RIGHT}, {"growth_after", TF_ALIGN_RIGHT},
    {"growth_after_lo", TF_ALIGN_RIGHT}, {"growth_after_hi", TF_ALIGN_RIGHT},
    {"sense", TF_ALIGN_LEFT},          {"doubling_time", TF_ALIGN_RIGHT},
    {"doubling_time_lo", TF_ALIGN_RIGHT}, {"doubling_time_hi", TF_ALIGN_RIGHT},
    {"level", TF_ALIGN_RIGHT}};
#define NJSON (sizeof json_cols / sizeof json_cols[0])

static int write_json(tf_writer *w, const bk_fit *f, const verdict *v) {
  const bk_target *t = f->t;
  char rbuf[32];
  int ok = f->status == 0;
  tf_cell c[NJSON];
  size_t n = 0;
  c[n++] = tf_cell_str(rule_names[v->rule]);
  c[n++] = tf_cell_str(twofold_series_region(t->s));
  c[n++] = tf_cell_str(twofold_series_column_name(t->s, t->col));
  c[n++] = f->n ? tf_cell_date(v->date) : tf_cell_null();
  c[n++] = tf_cell_str(result_name(v, f, rbuf, sizeof rbuf));
  c[n++] = tf_cell_dbl(v->probability, -1);
  c[n++] = ok ? tf_cell_int((long long)v->recent) : tf_cell_null();
  c[n++] = v->have_break ? tf_cell_date(v->break_date) : tf_cell_null();
  c[n++] = tf_cell_dbl(100 * v->before, -1);
  c[n++] = tf_cell_dbl(100 * v->after, -1);
  c[n++] = tf_cell_dbl(100 * v->after_lo, -1);
  c[n++] = tf_cell_dbl(100 * v->after_hi, -1);
  c[n++] = tf_cell_sense(v->sense);
  c[n++] = tf_cell_dbl(v->dt, -1);
  c[n++] = tf_cell_dbl(v->dt_lo, -1);
  c[n++] = tf_cell_dbl(v->dt_hi, -1);
  c[n++] = tf_cell_dbl(f->level, -1);
  return tf_writer_row(w, c);
}

static const char *num(char *buf, size_t size, double v, int prec,
                       int plus) {
  return tf_cli_format_number(buf, size, v, prec, plus);
}

static int write_text(FILE *out, const options *o, const bk_fit *f,
                      const verdict *v) {
  char rbuf[32], d0[16], d1[16], a[32], b[32], c[32], pct[32];
  const char *region = twofold_series_region(f->t->s);
  const char *rule = rule_names[v->rule];
  const char *res = result_name(v, f, rbuf, sizeof rbuf);
  if (v->result == RES_STATUS) {
    fprintf(out, "%s: %s: %s: %s\n", region, rule, res, f->msg);
    return 0;
  }
  twofold_date_format(v->date, d0, sizeof d0);
  tf_cli_format_number(pct, sizeof pct, 100 * f->level, -1, 0);
  fprintf(out, "%s: %s: %s: ", region, rule, res);
  switch (v->rule) {
  case RULE_UPTURN:
    twofold_date_format(v->break_date, d1, sizeof d1);
    fprintf(out,
            "change most probably on %s, P %s within the %zu days to %s; "
            "growth %s -> %s %%/day",
            d1, num(a, sizeof a, v->probability, 2, 0), v->recent, d0,
            num(b, sizeof b, 100 * v->before, 1, 1),
            num(c, sizeof c, 100 * v->after, 1, 1));
    if (v->result == RES_SUPPRESSED) {
      twofold_date_format(o->since, d1, sizeof d1);
      fprintf(out, " (before --since %s)", d1);
    }
    break;
  case RULE_GROWTH:
    fprintf(out, "P(growth rate > 0) %s on %s; growth %s %%/day (",
            num(a, sizeof a, v->probability, 3, 0), d0,
            num(b, sizeof b, 100 * v->after, 1, 1));
    fprintf(out, "%s%% CI %s..%s)", pct,
            num(a, sizeof a, 100 * v->after_lo, 1, 1),
            num(b, sizeof b, 100 * v->after_hi, 1, 1));
    break;
  case RULE_DOUBLING:
    if (v->sense > 0)
      fprintf(out, "doubling time %s days (%s%% CI %s..%s) on %s",
              num(a, sizeof a, v->dt, 1, 0), pct,
              num(b, sizeof b, v->dt_lo, 1, 0),
              num(c, sizeof c, v->dt_hi, 1, 0), d0);
    else
      fprintf(out, "not growing on %s; growth %s %%/day", d0,
              num(a, sizeof a, 100 * v->after, 1, 1));
    fprintf(out, "; threshold %s days",
            num(b, sizeof b, o->doubling_days, -1, 0));
    break;
  default:
    break;
  }
  fputc('\n', out);
  return ferror(out) ? -1 : 0;
}

/* ------------------------------------------------------------------ */
/* main                                                                */
/* ------------------------------------------------------------------ */

typedef struct job {
  const options *o;
  const twofold_cp_options *cpo;
  const bk_target *targets;
  bk_fit *fits;
  latest *L;
} job;

/* The posterior and the latest day's draws of target i. */
static int fit_one(void *ctx, size_t i) {
  job *jb = ctx;
  bk_fit *f = &jb->fits[i];
  int st = bk_fit_run(f, jb->cpo, &jb->o->in, &jb->targets[i]);
  if (st == 0 && f->status == 0)
    st = latest_of(jb->o, f, &jb->L[i]);
  /* every posterior is kept until the output: without what only sampling
   * (done above) needs */
  if (st == 0 && f->ch != NULL)
    (void)twofold_changes_shrink(f->ch);
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
  latest *L = NULL;
  int st, flagged = 0;

  if ((st = bk_cp_options(&o->model, &cpo)) != 0)
    goto done;
  if ((st = bk_read(&o->in, files, nfiles, &set)) != TF_EXIT_OK)
    goto done;
  if ((st = bk_select_targets(&o->in, set, &total, &targets, &ntargets)) !=
      TF_EXIT_OK)
    goto done;
  fits = calloc(ntargets ? ntargets : 1, sizeof *fits);
  L = calloc(ntargets ? ntargets : 1, sizeof *L);
  if (fits == NULL || L == NULL) {
    tf_cli_msg("out of memory");
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  /* The output opens before the regions are evaluated (a file is still
   * written whole or not at all: tf_output commits it at the end); regions
   * go in batches of a few per thread, evaluated, written and freed, so
   * memory stays that of one batch however many regions there are. */
  if ((out = tf_output_open(o->output)) == NULL) {
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  if (o->format == FORMAT_JSON &&
      (w = tf_writer_new(tf_output_stream(out), TF_FORMAT_JSON, json_cols,
                         NJSON)) == NULL) {
    tf_cli_msg("out of memory");
    st = TF_EXIT_OUTPUT;
    goto done;
  }
  size_t batch = 16 * (size_t)(o->in.threads > 0 ? o->in.threads : 1);
  for (size_t b0 = 0; b0 < ntargets && st == TF_EXIT_OK; b0 += batch) {
    size_t nb = ntargets - b0 < batch ? ntargets - b0 : batch;
    job jb = {o, cpo, targets + b0, fits + b0, L + b0};
    if ((st = bk_parallel(nb, o->in.threads, fit_one, &jb)) != 0)
      goto done;
    for (size_t i = b0; i < b0 + nb && st == TF_EXIT_OK; i++) {
      const bk_fit *f = &fits[i];
      if (f->status != 0) {
        char sbuf[32];
        tf_cli_msg("%s: not evaluated (%s): %s",
                   twofold_series_region(targets[i].s),
                   tf_cli_status_name(f->status, sbuf, sizeof sbuf), f->msg);
      }
      for (int r = 0; r < NRULES && st == TF_EXIT_OK; r++) {
        if (!o->rules[r])
          continue;
        verdict v;
        evaluate(o, f, &L[i], r, &v);
        if (v.result == RES_FLAGGED)
          flagged = 1;
        if (v.result != RES_FLAGGED && !o->all)
          continue;
        int rc = o->format == FORMAT_JSON
                     ? write_json(w, f, &v)
                     : write_text(tf_output_stream(out), o, f, &v);
        if (rc != 0)
          st = -1;
      }
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
  free(L);
  free(targets);
  twofold_series_free(total);
  twofold_set_free(set);
  twofold_cp_options_free(cpo);
  if (st == TF_EXIT_DATA)
    return AL_EXIT_DATA;
  if (st == TF_EXIT_OK)
    return flagged ? AL_EXIT_FLAGGED : AL_EXIT_NOTHING;
  return st;
}

int main(int argc, char **argv) {
  tf_cli_set_program(PROGRAM);
  options o;
  int st = parse_args(argc, argv, &o);
  if (st == TF_EXIT_DATA) /* parse_args gives no such status; be safe */
    st = AL_EXIT_DATA;
  if (st < 0)
    st = run(&o, argv + optind, (size_t)(argc - optind));
  bk_input_free(&o.in);
  return st;
}
