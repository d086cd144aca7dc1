/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Shared by twofold-breaks and twofold-alert; see breaks-common.h. */
#include "breaks-common.h"

#include <errno.h>
#include <math.h>
#include <pthread.h>
#include <unistd.h>
#include <stdlib.h>
#include <string.h>

int bk_input_init(bk_input *in, int nargs) {
  memset(in, 0, sizeof *in);
  in->threads = bk_default_threads();
  return tf_cli_input_init(&in->io, nargs);
}

void bk_input_free(bk_input *in) { tf_cli_input_free(&in->io); }

/* A finite number in [min, max]. */
static int parse_closed(const char *opt, const char *arg, double min,
                        double max, double *out) {
  char *end;
  errno = 0;
  double v = strtod(arg, &end);
  if (end == arg || *end != '\0' || errno == ERANGE || !isfinite(v))
    return tf_cli_usage_error("%s: not a number: '%s'", opt, arg);
  if (!(v >= min && v <= max))
    return tf_cli_usage_error("%s: %s is outside %g..%g", opt, arg, min,
                              max);
  *out = v;
  return 0;
}

int bk_parse_option(int c, const char *arg, bk_model *m, bk_input *in) {
  long v;
  int st;
  switch (c) {
  case 'k':
    if ((m->kind = twofold_cp_kind_from_string(arg)) < 0)
      return tf_cli_usage_error("--kind: '%s' is not kink, jump or level",
                                arg);
    m->have_kind = 1;
    return 0;
  case BK_OPT_PER_YEAR:
    if ((st = tf_cli_parse_double_open("--changes-per-year", arg, 0, 365.25,
                                       &m->per_year)))
      return st;
    m->have_per_year = 1;
    return 0;
  case BK_OPT_PROB:
    if ((st = tf_cli_parse_double_open("--change-prob", arg, 0, 1, &m->prob)))
      return st;
    m->have_prob = 1;
    return 0;
  case BK_OPT_MIN_SEGMENT:
    if ((st = tf_cli_parse_long("--min-segment", arg, 1, 10000, &v)))
      return st;
    m->min_segment = v;
    m->have_min_segment = 1;
    return 0;
  case BK_OPT_SHAPE:
    if ((st = tf_cli_parse_long("--length-shape", arg, 1, 50, &v)))
      return st;
    m->shape = v;
    m->have_shape = 1;
    return 0;
  case BK_OPT_RATE_SD:
    if ((st = tf_cli_parse_double_open("--rate-sd", arg, 0, 10.000001,
                                       &m->rate_sd)))
      return st;
    m->have_rate_sd = 1;
    return 0;
  case BK_OPT_RATE_MEAN:
    if ((st = parse_closed("--rate-mean", arg, -10, 10, &m->rate_mean)))
      return st;
    m->have_rate_mean = 1;
    return 0;
  case BK_OPT_DISPERSION:
    if (strcmp(arg, "estimate") == 0) {
      m->dispersion = 0;
    } else if ((st = parse_closed("--dispersion", arg, 1, 1e6,
                                  &m->dispersion))) {
      return st;
    }
    m->have_dispersion = 1;
    return 0;
  case BK_OPT_WEEKDAY:
  case BK_OPT_NO_WEEKDAY:
    m->weekday = c == BK_OPT_WEEKDAY;
    m->have_weekday = 1;
    return 0;
  case 'l':
    if ((st = tf_cli_parse_double_open("--level", arg, 0, 1, &m->level)))
      return st;
    m->have_level = 1;
    return 0;
  case BK_OPT_CLEAN:
  case BK_OPT_NO_CLEAN:
    m->clean = c == BK_OPT_CLEAN;
    m->have_clean = 1;
    return 0;
  case 'a':
    if ((st = tf_cli_parse_date("--as-of", arg, &in->as_of)))
      return st;
    in->have_as_of = 1;
    return 0;
  case BK_OPT_THREADS:
    if ((st = tf_cli_parse_long("--threads", arg, 1, 64, &v)))
      return st;
    in->threads = (int)v;
    return 0;
  default:
    return tf_cli_input_option(c, arg, &in->io);
  }
}

int bk_model_check(const bk_model *m) {
  if (m->have_per_year && m->have_prob)
    return tf_cli_usage_error(
        "--changes-per-year and --change-prob set the same prior: give one");
  return 0;
}

int bk_print_model_help(FILE *f) {
  twofold_cp_options *o = NULL;
  if (twofold_cp_options_new(&o) != 0) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  double rmean = 0, rsd = 0;
  twofold_cp_options_get_rate_prior(o, &rmean, &rsd);
  double phi = twofold_cp_options_get_dispersion(o);
  char phitext[64];
  if (phi == 0)
    snprintf(phitext, sizeof phitext, "estimated from the series");
  else
    snprintf(phitext, sizeof phitext, "%g", phi);
  fprintf(f,
          "Model:\n"
          "  -k, --kind=KIND            kink (growth rate changes, level "
          "continuous),\n"
          "                             jump (level and growth rate change) "
          "or level\n"
          "                             (growth 0, the level changes) "
          "(default %s)\n"
          "      --changes-per-year=N   prior expected changes per year "
          "(default %g)\n"
          "      --change-prob=P        the same as a probability per day "
          "(default %.6g)\n"
          "      --min-segment=DAYS     shortest segment (default %d)\n"
          "      --length-shape=K       negative-binomial shape of segment "
          "lengths,\n"
          "                             1..50; 1 is geometric (default %d)\n"
          "      --rate-sd=SD           prior sd of a segment's growth rate, "
          "per day\n"
          "                             (default %g)\n"
          "      --rate-mean=M          prior mean of it, per day (default "
          "%g)\n"
          "      --dispersion=PHI       'estimate' or a value >= 1; 1 is "
          "Poisson\n"
          "                             (default %s)\n"
          "      --weekday, --no-weekday  day-of-week effects (default %s)\n"
          "      --clean, --no-clean    backlog days and unreported zeros "
          "as missing\n"
          "                             (default %s)\n"
          "  -l, --level=P              credible level (default %g)\n",
          twofold_cp_kind_to_string(twofold_cp_options_get_kind(o)),
          twofold_cp_options_get_changes_per_year(o),
          twofold_cp_options_get_change_prob(o),
          twofold_cp_options_get_min_segment(o),
          twofold_cp_options_get_length_shape(o), rsd, rmean, phitext,
          twofold_cp_options_get_weekday(o) ? "on" : "off",
          twofold_cp_options_get_clean(o) ? "on" : "off",
          twofold_cp_options_get_level(o));
  twofold_cp_options_free(o);
  return 0;
}

void bk_print_input_help(FILE *f) {
  fputs("Days and regions:\n"
        "  -a, --as-of=DATE           use the counts up to DATE (default: "
        "all)\n",
        f);
  tf_cli_input_help_regions(f, BK_TOTAL_LABEL);
  fputs("      --threads=N            regions analysed at once (default: "
        "processors\n"
        "                             online, at most 4)\n",
        f);
  tf_cli_input_help(f);
}

/* Report a setter's failure. */
static int setter_failed(twofold_cp_options *o, int rc) {
  if (rc == TWOFOLD_ENOMEM) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  return tf_cli_usage_error("%s", twofold_cp_options_errmsg(o));
}

int bk_cp_options(const bk_model *m, twofold_cp_options **out) {
  twofold_cp_options *o = NULL;
  *out = NULL;
  if (twofold_cp_options_new(&o) != 0) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  int rc = 0;
#define SET(call)                                                            \
  do {                                                                       \
    if (rc == 0 && (rc = (call)) != 0) {                                     \
      int st_ = setter_failed(o, rc);                                        \
      twofold_cp_options_free(o);                                            \
      return st_;                                                            \
    }                                                                        \
  } while (0)
  /* The change rate and the minimum segment bound each other: set the
   * rate first where the default minimum allows it, then the minimum,
   * then the rate for good. */
  if (m->have_per_year)
    (void)twofold_cp_options_set_changes_per_year(o, m->per_year);
  if (m->have_prob)
    (void)twofold_cp_options_set_change_prob(o, m->prob);
  if (m->have_min_segment)
    SET(twofold_cp_options_set_min_segment(o, (int)m->min_segment));
  if (m->have_per_year)
    SET(twofold_cp_options_set_changes_per_year(o, m->per_year));
  if (m->have_prob)
    SET(twofold_cp_options_set_change_prob(o, m->prob));
  if (m->have_kind)
    SET(twofold_cp_options_set_kind(o, m->kind));
  if (m->have_shape)
    SET(twofold_cp_options_set_length_shape(o, (int)m->shape));
  if (m->have_rate_sd || m->have_rate_mean) {
    double mean = 0, sd = 0;
    twofold_cp_options_get_rate_prior(o, &mean, &sd);
    SET(twofold_cp_options_set_rate_prior(
        o, m->have_rate_mean ? m->rate_mean : mean,
        m->have_rate_sd ? m->rate_sd : sd));
  }
  if (m->have_dispersion)
    SET(twofold_cp_options_set_dispersion(o, m->dispersion));
  if (m->have_weekday)
    SET(twofold_cp_options_set_weekday(o, m->weekday));
  if (m->have_level)
    SET(twofold_cp_options_set_level(o, m->level));
  if (m->have_clean)
    SET(twofold_cp_options_set_clean(o, m->clean));
#undef SET
  *out = o;
  return 0;
}

int bk_read(const bk_input *in, char **files, size_t nfiles,
            twofold_set **out) {
  static char *stdin_only[] = {(char *)"-"};
  *out = NULL;
  int stdin_seen = 0;
  for (size_t i = 0; i < nfiles; i++)
    if (strcmp(files[i], "-") == 0 && stdin_seen++)
      return tf_cli_usage_error("standard input ('-') named twice");
  if (nfiles == 0) {
    files = stdin_only;
    nfiles = 1;
  }
  twofold_read_options *ro = NULL;
  int rc = tf_cli_input_read_options(&in->io, &ro);
  if (rc != 0)
    return rc;
  int st = tf_cli_read_inputs(files, nfiles, ro, out);
  twofold_read_options_free(ro);
  return st;
}

/* tf_cli_resolve_fn: ctx the input options, element a bk_target. */
static int resolve_column(const void *ctx, const twofold_series *s,
                          void *element) {
  const bk_input *in = ctx;
  bk_target *t = element;
  t->s = s;
  t->col = 0;
  if (in->io.count != NULL)
    return tf_cli_series_column(s, in->io.count, &t->col);
  return TF_EXIT_OK;
}

int bk_select_targets(const bk_input *in, const twofold_set *set,
                      twofold_series **total, bk_target **out, size_t *n) {
  void *t = NULL;
  int st = tf_cli_targets(set, BK_TOTAL_LABEL, in->io.regions,
                          in->io.nregions, in->io.no_total, total,
                          sizeof(bk_target), resolve_column, in, &t, n);
  *out = t;
  return st;
}

void bk_fit_free(bk_fit *f) {
  twofold_changes_free(f->ch);
  free(f->p);
  free(f->g);
  free(f->glo);
  free(f->ghi);
  free(f->dt);
  free(f->dtlo);
  free(f->dthi);
  free(f->sense);
  memset(f, 0, sizeof *f);
}

int bk_fit_run(bk_fit *f, const twofold_cp_options *o, const bk_input *in,
               const bk_target *t) {
  memset(f, 0, sizeof *f);
  f->t = t;
  f->level = twofold_cp_options_get_level(o);
  const double *v = twofold_series_values(t->s, t->col);
  size_t len = twofold_series_length(t->s);
  int32_t first = twofold_series_first_day(t->s);
  size_t a = 0, b = len;
  if (in->have_as_of) {
    int64_t last = (int64_t)in->as_of - first + 1;
    if (last < 0)
      last = 0;
    if ((uint64_t)last < b)
      b = (size_t)last;
  }
  while (a < b && isnan(v[a]))
    a++;
  while (b > a && isnan(v[b - 1]))
    b--;
  f->first_day = first + (int32_t)a;
  f->n = b - a;
  f->y = v + a;
  if (twofold_changes_new(&f->ch) != 0) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  int rc = twofold_changes_run(f->ch, o, f->y, f->n,
                               twofold_date_weekday(f->first_day));
  if (rc == TWOFOLD_ENOMEM) {
    tf_cli_msg("%s: out of memory", twofold_series_region(t->s));
    return TF_EXIT_OUTPUT;
  }
  if (rc != 0) {
    f->status = rc;
    f->msg = twofold_changes_errmsg(f->ch);
    return 0;
  }
  size_t n = f->n;
  f->p = malloc(n * sizeof *f->p);
  f->g = malloc(n * sizeof *f->g);
  f->glo = malloc(n * sizeof *f->glo);
  f->ghi = malloc(n * sizeof *f->ghi);
  f->dt = malloc(n * sizeof *f->dt);
  f->dtlo = malloc(n * sizeof *f->dtlo);
  f->dthi = malloc(n * sizeof *f->dthi);
  f->sense = malloc(n * sizeof *f->sense);
  if (!f->p || !f->g || !f->glo || !f->ghi || !f->dt || !f->dtlo ||
      !f->dthi || !f->sense) {
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  if (twofold_changes_p_change(f->ch, f->p) != 0 ||
      twofold_changes_growth(f->ch, f->g, f->glo, f->ghi) != 0 ||
      twofold_changes_doubling(f->ch, f->dt, f->dtlo, f->dthi, f->sense) !=
          0) {
    tf_cli_msg("%s: %s", twofold_series_region(t->s),
               twofold_changes_errmsg(f->ch));
    return TF_EXIT_OUTPUT;
  }
  return 0;
}

double bk_norm_cdf(double x) { return 0.5 * erfc(-x / sqrt(2.0)); }

/* Bisection on erfc, which is monotone: P(|Z| <= z) = erf(z / sqrt 2). */
double bk_norm_quantile2(double level) {
  double lo = 0, hi = 40;
  for (int i = 0; i < 200 && hi - lo > 1e-15 * hi; i++) {
    double mid = 0.5 * (lo + hi);
    if (erfc(mid / sqrt(2.0)) > 1 - level)
      lo = mid;
    else
      hi = mid;
  }
  return 0.5 * (lo + hi);
}

/* ------------------------------------------------------------------ */
/* Regions in parallel                                                 */
/* ------------------------------------------------------------------ */

typedef struct pool {
  pthread_mutex_t lock;
  size_t next, n;
  int (*fn)(void *, size_t);
  void *ctx;
  int *status; /* per index */
  int stop;
} pool;

static void *worker(void *arg) {
  pool *p = arg;
  for (;;) {
    pthread_mutex_lock(&p->lock);
    size_t i = p->next;
    int stop = p->stop;
    if (i < p->n && !stop)
      p->next++;
    pthread_mutex_unlock(&p->lock);
    if (i >= p->n || stop)
      return NULL;
    int st = p->fn(p->ctx, i);
    p->status[i] = st;
    if (st != 0) {
      pthread_mutex_lock(&p->lock);
      p->stop = 1;
      pthread_mutex_unlock(&p->lock);
    }
  }
}

int bk_default_threads(void) {
  long c = sysconf(_SC_NPROCESSORS_ONLN);
  if (c < 1)
    c = 1;
  if (c > 4)
    c = 4;
  return (int)c;
}

int bk_parallel(size_t n, int threads, int (*fn)(void *ctx, size_t i),
                void *ctx) {
  if (threads < 1)
    threads = 1;
  if ((size_t)threads > n)
    threads = (int)(n ? n : 1);
  if (threads == 1) {
    for (size_t i = 0; i < n; i++) {
      int st = fn(ctx, i);
      if (st != 0)
        return st;
    }
    return 0;
  }
  pool p;
  memset(&p, 0, sizeof p);
  p.n = n;
  p.fn = fn;
  p.ctx = ctx;
  p.status = calloc(n, sizeof *p.status);
  pthread_t *tid = calloc((size_t)threads, sizeof *tid);
  if (p.status == NULL || tid == NULL ||
      pthread_mutex_init(&p.lock, NULL) != 0) {
    free(p.status);
    free(tid);
    tf_cli_msg("out of memory");
    return TF_EXIT_OUTPUT;
  }
  int started = 0;
  for (int k = 0; k < threads; k++) {
    if (pthread_create(&tid[k], NULL, worker, &p) != 0)
      break;
    started++;
  }
  if (started == 0)
    worker(&p); /* no thread could start: do the work here */
  for (int k = 0; k < started; k++)
    pthread_join(tid[k], NULL);
  pthread_mutex_destroy(&p.lock);
  int st = 0;
  for (size_t i = 0; i < n && st == 0; i++)
    st = p.status[i];
  free(p.status);
  free(tid);
  return st;
}
