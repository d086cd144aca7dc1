/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Bayesian changepoints in the growth rate: options, the exact recursions
 * of Fearnhead (2006, Statistics and Computing 16:203-213) for JUMP and
 * LEVEL segments, and the results shared with the KINK recursions.
 *
 * Indexing (0-based days 0..n-1): a segment [s, e]; Fearnhead's change at
 * tau (y_tau ends a segment) is exposed as a change on day tau + 1, the
 * first day of the new regime.
 *   Q[t]  = log p(y_t..y_{n-1} | a segment starts at t), Q[n] = 0;
 *   P(change on day i | y) = sum over the segments [s, i-1] of
 *     P(change on day s | y) P(s, i-1) g(i-s) Q(i) / Q(s)
 * (in probabilities, forward over the days, after the backward pass; KINK
 * has the forward sums Fa[i] = log p(y_0..y_{i-1}, a segment ends at i-1)
 * of its own, and P(change on day i | y) = exp(Fa[i] + Q[i] - Q[0])).
 * Pruning (Fearnhead 2006, sec. 3.3): for each start t the ends e are
 * scanned upward until the bound P(t,e) Q(e+1) P(L >= e-t+1) stays below
 * epsilon times the running sum for 14 consecutive ends; the change
 * probabilities, the count distribution, the growth posterior and
 * sampling use the same candidate ends, so all results are those of one
 * (truncated) model.
 * JUMP segments [t, e] for one start t are evaluated with one set of
 * incremental power sums (segment.c, tf_psum), grown by a day as e grows,
 * each fit started from the last evaluation for [t, e-1] with day e's
 * term added (tf_seg_jump_ps; the modes of [t, e-1] and [t, e-2]
 * extrapolated where that is not at hand); the most
 * probable segments' fits and twofold_changes_segment_logml use the same
 * solver on fresh sums.
 */
#include "cp.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define PRUNE_RUN 14
#define CACHE_LIMIT ((size_t)200000000)

/* ---- options ------------------------------------------------------------ */

void tf_cp_options_defaults(struct twofold_cp_options *o) {
  memset(o, 0, sizeof *o);
  o->kind = TWOFOLD_CP_KINK;
  o->mean_len = 365.25 / 4;
  o->min_seg = 7;
  o->shape = 2;
  o->rmean = 0;
  o->rsd = 0.1;
  o->alpha = 1;
  o->beta = 0;
  o->phi = 0;
  o->weekday = 1;
  o->prune = 1e-10;
  o->max_changes = 20;
  o->level = 0.95;
  o->grid = 0;
  o->clean = 1;
}

static const char *kind_names[] = {"kink", "jump", "level"};

const char *twofold_cp_kind_to_string(int kind) {
  if (kind < 0 || kind > 2)
    return NULL;
  return kind_names[kind];
}

int twofold_cp_kind_from_string(const char *name) {
  if (!name)
    return TWOFOLD_EINVAL;
  for (int i = 0; i < 3; i++)
    if (strcmp(name, kind_names[i]) == 0)
      return i;
  return TWOFOLD_EINVAL;
}

int twofold_cp_options_new(twofold_cp_options **out) {
  if (!out)
    return TWOFOLD_EINVAL;
  *out = malloc(sizeof **out);
  if (!*out)
    return TWOFOLD_ENOMEM;
  tf_cp_options_defaults(*out);
  return 0;
}

void twofold_cp_options_free(twofold_cp_options *o) { free(o); }

int twofold_cp_options_copy(const twofold_cp_options *o,
                            twofold_cp_options **out) {
  if (!o || !out)
    return TWOFOLD_EINVAL;
  *out = malloc(sizeof **out);
  if (!*out)
    return TWOFOLD_ENOMEM;
  memcpy(*out, o, sizeof **out);
  (*out)->msg[0] = '\0';
  return 0;
}

const char *twofold_cp_options_errmsg(const twofold_cp_options *o) {
  return o ? o->msg : "no options object (NULL)";
}

#define OPT_NULL_CHECK(o)                                                    \
  do {                                                                       \
    if (!(o))                                                                \
      return TWOFOLD_EINVAL;                                                 \
    (o)->msg[0] = '\0';                                                      \
  } while (0)

int twofold_cp_options_set_kind(twofold_cp_options *o, int kind) {
  OPT_NULL_CHECK(o);
  if (kind < 0 || kind > 2)
    return tf_msg_set(o->msg, TWOFOLD_EINVAL,
                      "unknown changepoint kind %d (kink 0, jump 1, level 2)",
                      kind);
  o->kind = kind;
  return 0;
}
int twofold_cp_options_get_kind(const twofold_cp_options *o) {
  return o ? o->kind : TWOFOLD_CP_KINK;
}

int twofold_cp_options_set_change_prob(twofold_cp_options *o, double p) {
  OPT_NULL_CHECK(o);
  if (!(p > 0 && p < 1.0 / o->min_seg))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "change probability %g per day is outside (0, 1/%d) "
                      "(1 over the minimum segment length)",
                      p, o->min_seg);
  o->mean_len = 1 / p;
  return 0;
}
double twofold_cp_options_get_change_prob(const twofold_cp_options *o) {
  return o ? 1 / o->mean_len : 0;
}

int twofold_cp_options_set_changes_per_year(twofold_cp_options *o,
                                            double rate) {
  OPT_NULL_CHECK(o);
  if (!(rate > 0 && rate < 365.25 / o->min_seg))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "%g changes per year is outside (0, %g) (365.25 over "
                      "the minimum segment length)",
                      rate, 365.25 / o->min_seg);
  o->mean_len = 365.25 / rate;
  return 0;
}
double twofold_cp_options_get_changes_per_year(const twofold_cp_options *o) {
  return o ? 365.25 / o->mean_len : 0;
}

int twofold_cp_options_set_min_segment(twofold_cp_options *o, int days) {
  OPT_NULL_CHECK(o);
  if (days < 1 || days > 10000)
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "minimum segment length %d days is outside 1..10000",
                      days);
  if (!(o->mean_len > days))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "minimum segment length %d days is not below the mean "
                      "segment length %g days (set fewer changes first)",
                      days, o->mean_len);
  o->min_seg = days;
  return 0;
}
int twofold_cp_options_get_min_segment(const twofold_cp_options *o) {
  return o ? o->min_seg : 0;
}

int twofold_cp_options_set_length_shape(twofold_cp_options *o, int k) {
  OPT_NULL_CHECK(o);
  if (k < 1 || k > 50)
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "segment length shape %d is outside 1..50", k);
  o->shape = k;
  return 0;
}
int twofold_cp_options_get_length_shape(const twofold_cp_options *o) {
  return o ? o->shape : 0;
}

int twofold_cp_options_set_rate_prior(twofold_cp_options *o, double mean,
                                      double sd) {
  OPT_NULL_CHECK(o);
  if (!isfinite(mean) || fabs(mean) > 10)
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "growth-rate prior mean %g is outside [-10, 10] per day",
                      mean);
  if (!(sd > 0 && sd <= 10))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "growth-rate prior sd %g is outside (0, 10] per day",
                      sd);
  o->rmean = mean;
  o->rsd = sd;
  return 0;
}
int twofold_cp_options_get_rate_prior(const twofold_cp_options *o,
                                      double *mean, double *sd) {
  if (!o)
    return TWOFOLD_EINVAL;
  if (mean)
    *mean = o->rmean;
  if (sd)
    *sd = o->rsd;
  return 0;
}

int twofold_cp_options_set_level_prior(twofold_cp_options *o, double alpha,
                                       double beta) {
  OPT_NULL_CHECK(o);
  if (!(alpha > 0 && alpha <= 1e6))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "level prior shape %g is outside (0, 1e6]", alpha);
  if (!(beta >= 0 && beta <= 1e12))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "level prior rate %g is outside [0, 1e12] (0: scaled "
                      "to the series)",
                      beta);
  o->alpha = alpha;
  o->beta = beta;
  return 0;
}
int twofold_cp_options_get_level_prior(const twofold_cp_options *o,
                                       double *alpha, double *beta) {
  if (!o)
    return TWOFOLD_EINVAL;
  if (alpha)
    *alpha = o->alpha;
  if (beta)
    *beta = o->beta;
  return 0;
}

int twofold_cp_options_set_dispersion(twofold_cp_options *o, double phi) {
  OPT_NULL_CHECK(o);
  if (!(phi == 0 || (phi >= 1 && phi <= 1e6)))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "dispersion %g is neither 0 (estimate) nor in [1, 1e6]",
                      phi);
  o->phi = phi;
  return 0;
}
double twofold_cp_options_get_dispersion(const twofold_cp_options *o) {
  return o ? o->phi : 0;
}

int twofold_cp_options_set_weekday(twofold_cp_options *o, int on) {
  OPT_NULL_CHECK(o);
  if (on != 0 && on != 1)
    return tf_msg_set(o->msg, TWOFOLD_EINVAL,
                      "weekday switch %d is neither 0 nor 1", on);
  o->weekday = on;
  return 0;
}
int twofold_cp_options_get_weekday(const twofold_cp_options *o) {
  return o ? o->weekday : 0;
}

int twofold_cp_options_set_prune(twofold_cp_options *o, double eps) {
  OPT_NULL_CHECK(o);
  if (!(eps >= 0 && eps <= 1e-3))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "pruning threshold %g is outside [0, 1e-3]", eps);
  o->prune = eps;
  return 0;
}
double twofold_cp_options_get_prune(const twofold_cp_options *o) {
  return o ? o->prune : 0;
}

int twofold_cp_options_set_max_changes(twofold_cp_options *o, int m) {
  OPT_NULL_CHECK(o);
  if (m < 0 || m > 1000)
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "maximum number of changes %d is outside 0..1000", m);
  o->max_changes = m;
  return 0;
}
int twofold_cp_options_get_max_changes(const twofold_cp_options *o) {
  return o ? o->max_changes : 0;
}

int twofold_cp_options_set_level(twofold_cp_options *o, double level) {
  OPT_NULL_CHECK(o);
  if (!(level > 0 && level < 1))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "credible level %g is outside (0, 1)", level);
  o->level = level;
  return 0;
}
double twofold_cp_options_get_level(const twofold_cp_options *o) {
  return o ? o->level : 0;
}

int twofold_cp_options_set_grid(twofold_cp_options *o, int points) {
  OPT_NULL_CHECK(o);
  if (points != 0 && (points < 4 || points > 200))
    return tf_msg_set(o->msg, TWOFOLD_ERANGE,
                      "grid of %d points per knot is neither 0 (Laplace "
                      "messages) nor in 4..200",
                      points);
  o->grid = points;
  return 0;
}
int twofold_cp_options_get_grid(const twofold_cp_options *o) {
  return o ? o->grid : 0;
}

int twofold_cp_options_set_clean(twofold_cp_options *o, int on) {
  OPT_NULL_CHECK(o);
  if (on != 0 && on != 1)
    return tf_msg_set(o->msg, TWOFOLD_EINVAL,
                      "artefact switch %d is neither 0 nor 1", on);
  o->clean = on;
  return 0;
}
int twofold_cp_options_get_clean(const twofold_cp_options *o) {
  return o ? o->clean : 0;
}

/* Hampel (1974, JASA 69:383-393) identifier on a centred window of 15
 * days (the day itself left out): a day more than 3.5 robust standard
 * deviations from the window median, the robust sd being
 * max(1.4826 MAD, sqrt(median + 1)) so that Poisson noise alone is not
 * flagged, is a reporting artefact (backlog dump); so is a zero where the
 * median is at least 10 (an unreported day: P(0) < e^-10 under Poisson).
 * Both become missing days. */
/* ascending insertion sort of at most 14 values (no NaN) */
static void sort_small(double *v, int m) {
  for (int i = 1; i < m; i++) {
    double x = v[i];
    int j = i;
    while (j > 0 && v[j - 1] > x) {
      v[j] = v[j - 1];
      j--;
    }
    v[j] = x;
  }
}

size_t tf_cp_clean(double *y, size_t n) {
  enum { W = 7 };
  double win[2 * W], dev[2 * W];
  unsigned char *flag = calloc(n ? n : 1, 1);
  if (!flag)
    return 0;
  for (size_t t = 0; t < n; t++) {
    if (tf_isnan(y[t]))
      continue;
    size_t a = t > W ? t - W : 0, b = t + W < n ? t + W : n - 1;
    int m = 0;
    for (size_t u = a; u <= b; u++)
      if (u != t && !tf_isnan(y[u]))
        win[m++] = y[u];
    if (m < 6)
      continue;
    sort_small(win, m);
    double med = m % 2 ? win[m / 2] : 0.5 * (win[m / 2 - 1] + win[m / 2]);
    for (int i = 0; i < m; i++)
      dev[i] = fabs(win[i] - med);
    sort_small(dev, m);
    double mad = m % 2 ? dev[m / 2] : 0.5 * (dev[m / 2 - 1] + dev[m / 2]);
    double sd = fmax(1.4826 * mad, sqrt(med + 1));
    if (fabs(y[t] - med) > 3.5 * sd || (y[t] == 0 && med >= 10))
      flag[t] = 1;
  }
  size_t c = 0;
  for (size_t t = 0; t < n; t++)
    if (flag[t]) {
      y[t] = NAN;
      c++;
    }
  free(flag);
  return c;
}

/* ---- the posterior object ------------------------------------------------ */

int twofold_changes_new(twofold_changes **out) {
  if (!out)
    return TWOFOLD_EINVAL;
  *out = calloc(1, sizeof **out);
  if (!*out)
    return TWOFOLD_ENOMEM;
  tf_cp_options_defaults(&(*out)->opt);
  return 0;
}

/* Everything a run made, except the buffers a reused object keeps: the
 * segment-length tables (ch->lp, remade only when the length or the
 * prior changes) and the KINK pool (pool_free). */
static void changes_clear(twofold_changes *ch) {
  tf_cp_data_free(&ch->d);
  free(ch->Q);
  free(ch->Fa);
  free(ch->stop);
  free(ch->off);
  if (!ch->cache_pooled) {
    free(ch->clogP);
    free(ch->cb);
    free(ch->cv);
  }
  ch->cache_pooled = 0;
  free(ch->pch);
  free(ch->gmean);
  free(ch->gsd);
  free(ch->kprob);
  free(ch->mapstart);
  free(ch->mapb);
  free(ch->mapbsd);
  free(ch->maplvl);
  tf_kink_free(ch->kink);
  ch->Q = ch->Fa = NULL;
  ch->stop = ch->off = NULL;
  ch->clogP = ch->cb = ch->cv = NULL;
  ch->pch = ch->gmean = ch->gsd = ch->kprob = NULL;
  ch->mapstart = NULL;
  ch->mapb = ch->mapbsd = ch->maplvl = NULL;
  ch->kink = NULL;
  ch->ncache = ch->capcache = 0;
  ch->shrunk = 0;
  ch->ok = 0;
  ch->n = 0;
  ch->nmap = 0;
}

/* The buffers kept between KINK runs (after changes_clear). */
static void pool_free(twofold_changes *ch) {
  for (int i = 0; i < 4; i++) {
    free(ch->pool[i]);
    ch->pool[i] = NULL;
  }
  ch->poolcap = 0;
}

/* The JUMP and LEVEL cache (log P, b, its variance and backward()'s T per
 * candidate), kept between runs so that a daily job over many regions does
 * not take fresh pages for every series (as the KINK pool). */
static void jbuf_free(twofold_changes *ch) {
  for (int i = 0; i < 4; i++) {
    free(ch->jbuf[i]);
    ch->jbuf[i] = NULL;
  }
  ch->jbufcap = 0;
}

void twofold_changes_free(twofold_changes *ch) {
  if (!ch)
    return;
  changes_clear(ch);
  pool_free(ch);
  jbuf_free(ch);
  tf_lenprior_free(&ch->lp);
  free(ch);
}

static int fail(twofold_changes *ch, int code) {
  ch->status = code;
  if (code == TWOFOLD_ENOMEM && ch->msg[0] == '\0')
    tf_msg_set(ch->msg, code, "out of memory");
  changes_clear(ch);
  return code;
}

/* Room for one more JUMP or LEVEL candidate in the kept buffers (clogP,
 * cb and cv point into them; cache_pooled, so not freed with the
 * results). */
static int cache_room(twofold_changes *ch) {
  if (ch->ncache < ch->capcache)
    return 0;
  if (ch->ncache >= ch->jbufcap) {
    size_t cap = ch->jbufcap ? 2 * ch->jbufcap : 4096;
    if (cap > CACHE_LIMIT)
      cap = CACHE_LIMIT;
    if (cap <= ch->ncache)
      return tf_msg_set(ch->msg, TWOFOLD_ETOOLARGE,
                        "more than %zu candidate segments survive pruning; "
                        "raise the pruning threshold or shorten the series",
                        (size_t)CACHE_LIMIT);
    for (int i = 0; i < 4; i++) {
      double *a = realloc(ch->jbuf[i], cap * sizeof(double));
      if (!a)
        return TWOFOLD_ENOMEM;
      ch->jbuf[i] = a;
    }
    ch->jbufcap = cap;
  }
  ch->clogP = ch->jbuf[0];
  ch->cb = ch->jbuf[1];
  ch->cv = ch->jbuf[2];
  ch->cache_pooled = 1;
  ch->capcache = ch->jbufcap;
  return 0;
}

static int cache_push(twofold_changes *ch, double lp, double b, double v) {
  int rc = cache_room(ch);
  if (rc)
    return rc;
  ch->clogP[ch->ncache] = lp;
  if (ch->d.kind == TWOFOLD_CP_JUMP) {
    ch->cb[ch->ncache] = b;
    ch->cv[ch->ncache] = v;
  }
  ch->ncache++;
  return 0;
}

/* Log weight of segment [s, e] in the recursions, without F and Q. */
static inline double seg_prior(const twofold_changes *ch, size_t s, size_t e) {
  size_t L = e - s + 1;
  return e + 1 < ch->n ? tf_lg(&ch->lp, s, L) : tf_lsurv(&ch->lp, s, L);
}

/* The backward recursion (METHODS A2), which also leaves in ch->jbuf[3],
 * per cache entry, T(s, e) = P(s, e) g(e - s + 1) Q(e + 1) / Q(s) (0 where
 * impossible) for tf_cp_results: each term is taken against the running
 * largest as the sum is formed, e^{term - m} (tf_lsum_addq), and
 * multiplied by e^{m - Q(s)} once Q(s) is known, one exp per change of m
 * rather than one per entry. */
static int backward(twofold_changes *ch) {
  size_t n = ch->n;
  const tf_cpdata *d = &ch->d;
  double leps = ch->opt.prune > 0 ? log(ch->opt.prune) : -INFINITY;
  double lnmax = log((double)n + 1);
  /* where the running largest changed for the current start: entry index
   * and the new largest */
  size_t *mi = malloc(n * sizeof *mi);
  double *mv = malloc(n * sizeof *mv);
  if (!mi || !mv) {
    free(mi);
    free(mv);
    return TWOFOLD_ENOMEM;
  }
  ch->Q[n] = 0;
  int rc = 0;
  /* The cache is filled from t = n-1 down, contiguous per start. */
  for (size_t t = n; t-- > 0;) {
    double am = -INFINITY, as = 0; /* running sum e^am * as */
    size_t run = 0, e = t, nm = 0;
    double b = d->rmean, bprev = NAN;
    tf_psum ps; /* JUMP: the power sums of the segments starting at t */
    tf_psum_init(&ps, t, b);
    ch->off[t] = ch->ncache;
    for (; e < n; e++) {
      size_t L = e - t + 1;
      double lg = seg_prior(ch, t, e);
      double lp = -INFINITY, v = 0;
      if (lg > -INFINITY) {
        if (d->kind == TWOFOLD_CP_LEVEL) {
          lp = tf_seg_level(d, t, e, NULL);
        } else {
          /* warm start: the modes of [t, e-2] and [t, e-1] extrapolated */
          double b1 = b;
          if (isfinite(bprev))
            b = b + (b - bprev);
          lp = tf_seg_jump_ps(d, &ps, e, &b, &v, NULL);
          bprev = b1;
        }
      }
      size_t k = ch->ncache;
      rc = cache_push(ch, lp, b, v);
      if (rc)
        goto out;
      /* the sum, keeping e^{term - am} and where am changed */
      double am0 = am;
      ch->jbuf[3][k] = tf_lsum_addq(&am, &as, lp + lg + ch->Q[e + 1]);
      if (am != am0) {
        mi[nm] = L - 1;
        mv[nm++] = am;
      }
      if (e + 1 < n && L >= (size_t)ch->opt.min_seg && am > -INFINITY) {
        /* bound < eps * sum, with log sum in [am, am + log nterm] and
         * nterm <= n: the log is needed only between am and am + lnmax */
        double bound = lp + tf_lsurv(&ch->lp, t, L) + ch->Q[e + 1] - leps;
        int below = bound < am ||
                    (bound < am + lnmax && bound < am + log(as));
        if (below) {
          if (++run >= PRUNE_RUN)
            break;
        } else {
          run = 0;
        }
      }
    }
    ch->stop[t] = e < n ? e : n - 1;
    ch->Q[t] = tf_lsum_log(am, as);
    /* T = e^{term - m} e^{m - Q(t)} */
    size_t ne = ch->stop[t] - t + 1;
    double *c = ch->jbuf[3] + ch->off[t];
    for (size_t j = 0; j < nm; j++) {
      size_t to = j + 1 < nm ? mi[j + 1] : ne;
      double f = exp(mv[j] - ch->Q[t]);
      for (size_t i = mi[j]; i < to; i++)
        c[i] *= f;
    }
  }
out:
  free(mi);
  free(mv);
  return rc;
}

static inline size_t cidx(const twofold_changes *ch, size_t s, size_t e) {
  return ch->off[s] + (e - s);
}

/* y[i] += a x[i], i < m, four at a time in pairs (the same additions as
 * the plain loop, to the bit). */
static void axpy(double *restrict y, const double *restrict x, double a,
                 size_t m) {
  size_t i = 0;
  tf_v2d va = {a, a};
  for (; i + 4 <= m; i += 4) {
    tf_v2d_addto(y + i, va * tf_v2d_load(x + i));
    tf_v2d_addto(y + i + 2, va * tf_v2d_load(x + i + 2));
  }
  for (; i < m; i++)
    y[i] += a * x[i];
}

int tf_cp_results(twofold_changes *ch, const double *cw, const double *ct) {
  size_t n = ch->n;
  int K = ch->opt.max_changes;
  double lZ = ch->Q[0];
  ch->logZ = lZ;
  /* pr[i] = Pr(change on day i | y), unclamped: with cw from Fa and Q
   * before the pass; otherwise built by the pass itself, in day order
   * (pr[e+1] = sum_s pr[s] T(s, e), complete when the pass reaches e+1) */
  double *pr = calloc(n + 1, sizeof(double));
  if (!pr)
    return TWOFOLD_ENOMEM;
  if (cw)
    for (size_t i = 1; i < n; i++)
      pr[i] = exp(ch->Fa[i] + ch->Q[i] - lZ);
  pr[0] = 1;
  /* One pass over the candidates.  With cw (the forward pass of KINK):
   * W = Pr(segment [s, e] | a segment ends at e) = F(s-1) P(s,e) g(e-s+1)
   * / F(e) for e < n-1, and for the last segment Pr([s, n-1] | y); the
   * segment probability (METHODS A2) is then W Pr(change on day e+1 | y).
   * Otherwise the backward quantities alone: T = Pr(the segment starting
   * at s ends at e | a change at s, y) = P(s,e) g(e-s+1) Q(e+1) / Q(s),
   * from ct (backward()) or one exp per candidate, and the segment
   * probability pr[s] T.
   * Growth: segment weights into difference arrays (METHODS A2).
   * Number of changes (METHODS A2): the ratios r_j(t) = F_j(t) / F(t) obey
   * r_{j+1}(e+1) = sum_s r_j(s) W(s, e), and Pr(K = j | y) =
   * sum_s r_j(s) W(s, n-1), all in [0, 1], so no logarithms are needed;
   * without cw, r holds pi_j(t) = Pr(j changes before t, a change at t |
   * y) = r_j(t) pr[t], with pi_{j+1}(e+1) = sum_s pi_j(s) T(s, e) and
   * Pr(K = j | y) = sum_s pi_j(s) T(s, n-1).
   * r is held per j over the days; for each start the W of its ends are
   * collected first (Wt, 0 where impossible), so r_{j+1}(s+1..) +=
   * r_j(s) Wt is one contiguous axpy per j (the same additions in the
   * same order as one candidate at a time); a start's own difference-array
   * entries are summed in registers and added once. */
  double *d0 = calloc(n + 1, sizeof(double));
  double *d1 = calloc(n + 1, sizeof(double));
  double *d2 = calloc(n + 1, sizeof(double));
  size_t np1 = n + 1;
  double *rj = calloc((size_t)(K + 1) * np1, sizeof(double));
  double *Wt = malloc(n * sizeof(double));
  if (!d0 || !d1 || !d2 || !rj || !Wt) {
    free(d0);
    free(d1);
    free(d2);
    free(rj);
    free(Wt);
    free(pr);
    return TWOFOLD_ENOMEM;
  }
  for (int m = 0; m <= K; m++)
    ch->kprob[m] = 0;
  rj[0] = 1; /* r_0(0): no change before day 0 */
  int jump = ch->d.kind != TWOFOLD_CP_LEVEL; /* KINK (Laplace): as JUMP */
  for (size_t s = 0; s < n; s++) {
    if (cw ? ch->Fa[s] == -INFINITY : !(pr[s] > 0))
      continue;
    /* r_j(s) above 1e-20 (Pr(j changes before s | change at s)) only for
     * j in [jlo, jhi]; the others are left out, as negligible */
    double thr = cw ? 1e-20 : 1e-20 * pr[s], prs = pr[s], qs = ch->Q[s];
    int jlo = -1, jhi = -1;
    for (int j = 0; j <= K; j++)
      if (rj[(size_t)j * np1 + s] > thr) {
        if (jlo < 0)
          jlo = j;
        jhi = j;
      }
    double a0 = 0, a1 = 0, a2 = 0; /* d0[s], d1[s], d2[s] from this start */
    size_t stop = ch->stop[s];
    for (size_t e = s; e <= stop; e++) {
      size_t k = cidx(ch, s, e);
      Wt[e - s] = 0;
      double W, w, lp;
      if (cw) { /* 0 for an impossible segment */
        W = cw[k];
        w = e + 1 < n ? W * pr[e + 1] : W;
      } else if ((lp = ch->clogP[k]) == -INFINITY) {
        continue;
      } else if (e + 1 < n) {
        W = ct ? ct[k]
               : exp(lp + tf_lg(&ch->lp, s, e - s + 1) + ch->Q[e + 1] - qs);
        w = prs * W;
        pr[e + 1] += w;
      } else {
        W = ct ? ct[k] : exp(lp + tf_lsurv(&ch->lp, s, n - s) - qs);
        w = prs * W;
      }
      if (W == 0)
        continue;
      Wt[e - s] = W;
      if (w != 0) {
        double b = jump ? ch->cb[k] : 0, v = jump ? ch->cv[k] : 0;
        a0 += w;
        d0[e + 1] -= w;
        a1 += w * b;
        d1[e + 1] -= w * b;
        a2 += w * (b * b + v);
        d2[e + 1] -= w * (b * b + v);
      }
    }
    d0[s] += a0;
    d1[s] += a1;
    d2[s] += a2;
    if (jlo < 0)
      continue;
    /* ends before n-1 feed r_{j+1}(e+1); the end n-1 feeds P(K = j) */
    size_t lim = stop + 1 < n ? stop + 1 : n - 1; /* ends e < lim */
    size_t m = lim > s ? lim - s : 0;
    int top = jhi < K ? jhi : K - 1;
    for (int j = jlo; j <= top && m > 0; j++)
      axpy(rj + (size_t)(j + 1) * np1 + s + 1, Wt, rj[(size_t)j * np1 + s],
           m);
    if (stop + 1 == n && Wt[stop - s] != 0)
      for (int j = jlo; j <= jhi; j++)
        ch->kprob[j] += rj[(size_t)j * np1 + s] * Wt[stop - s];
  }
  free(Wt);
  free(rj);
  ch->pch[0] = 0;
  for (size_t i = 1; i < n; i++)
    ch->pch[i] = pr[i] > 1 ? 1 : pr[i];
  free(pr);
  double a0 = 0, a1 = 0, a2 = 0;
  for (size_t t = 0; t < n; t++) {
    a0 += d0[t];
    a1 += d1[t];
    a2 += d2[t];
    double m = a0 > 0 ? a1 / a0 : 0;
    double var = a0 > 0 ? a2 / a0 - m * m : 0;
    ch->gmean[t] = m;
    ch->gsd[t] = var > 0 ? sqrt(var) : 0;
  }
  free(d0);
  free(d1);
  free(d2);
  double tot = 0;
  for (int m = 0; m <= K; m++)
    tot += ch->kprob[m];
  ch->ktail = tot < 1 ? 1 - tot : 0;
  double km = 0;
  for (size_t i = 1; i < n; i++)
    km += ch->pch[i];
  ch->kmean = km;
  /* MAP segmentation (Viterbi over the same candidates) */
  double *V = malloc((n + 1) * sizeof(double));
  size_t *bp = malloc((n + 1) * sizeof(size_t));
  if (!V || !bp) {
    free(V);
    free(bp);
    return TWOFOLD_ENOMEM;
  }
  for (size_t i = 0; i <= n; i++) {
    V[i] = -INFINITY;
    bp[i] = 0;
  }
  V[0] = 0;
  double best = -INFINITY;
  size_t bests = 0;
  for (size_t s = 0; s < n; s++) {
    if (V[s] == -INFINITY)
      continue;
    for (size_t e = s; e <= ch->stop[s]; e++) {
      double lp = ch->clogP[cidx(ch, s, e)];
      if (lp == -INFINITY)
        continue;
      double v = V[s] + lp + seg_prior(ch, s, e);
      if (e + 1 == n) {
        if (v > best) {
          best = v;
          bests = s;
        }
      } else if (v > V[e + 1]) {
        V[e + 1] = v;
        bp[e + 1] = s;
      }
    }
  }
  size_t cnt = 0;
  for (size_t s = bests; s > 0; s = bp[s])
    cnt++;
  ch->nmap = cnt;
  ch->mapstart = malloc((cnt + 2) * sizeof(size_t));
  ch->mapb = malloc((cnt + 1) * sizeof(double));
  ch->mapbsd = malloc((cnt + 1) * sizeof(double));
  ch->maplvl = malloc((cnt + 1) * sizeof(double));
  if (!ch->mapstart || !ch->mapb || !ch->mapbsd || !ch->maplvl) {
    free(V);
    free(bp);
    return TWOFOLD_ENOMEM;
  }
  size_t k = cnt;
  for (size_t s = bests; s > 0; s = bp[s])
    ch->mapstart[k--] = s;
  ch->mapstart[0] = 0;
  ch->mapstart[cnt + 1] = n;
  free(V);
  free(bp);
  for (size_t j = 0; j <= cnt; j++) {
    size_t s = ch->mapstart[j], e = ch->mapstart[j + 1] - 1;
    if (ch->d.kind == TWOFOLD_CP_KINK) {
      /* the segment's fit given its knot's message; the level is filled
       * in by kink_laplace.c */
      size_t c = cidx(ch, s, e);
      ch->mapb[j] = ch->cb[c];
      ch->mapbsd[j] = sqrt(ch->cv[c]);
      ch->maplvl[j] = NAN;
    } else if (jump) {
      double b = ch->cb[cidx(ch, s, e)], v, lvl;
      tf_seg_jump_at(&ch->d, s, e, &b, &v, &lvl);
      ch->mapb[j] = b;
      ch->mapbsd[j] = sqrt(v);
      ch->maplvl[j] = lvl;
    } else {
      double lvl;
      tf_seg_level(&ch->d, s, e, &lvl);
      ch->mapb[j] = 0;
      ch->mapbsd[j] = 0;
      ch->maplvl[j] = lvl;
    }
  }
  return 0;
}

static int alloc_results(twofold_changes *ch) {
  size_t n = ch->n;
  ch->pch = malloc(n * sizeof(double));
  ch->gmean = malloc(n * sizeof(double));
  ch->gsd = malloc(n * sizeof(double));
  ch->kprob = calloc((size_t)ch->opt.max_changes + 1, sizeof(double));
  if (!ch->pch || !ch->gmean || !ch->gsd || !ch->kprob)
    return TWOFOLD_ENOMEM;
  return 0;
}

int twofold_changes_run(twofold_changes *ch, const twofold_cp_options *o,
                        const double *y, size_t n, int first_weekday) {
  if (!ch)
    return TWOFOLD_EINVAL;
  changes_clear(ch);
  ch->msg[0] = '\0';
  if (o)
    ch->opt = *o;
  else
    tf_cp_options_defaults(&ch->opt);
  if (!y && n > 0) {
    tf_msg_set(ch->msg, TWOFOLD_EINVAL, "no counts (NULL) for %zu days", n);
    return fail(ch, TWOFOLD_EINVAL);
  }
  if (first_weekday < 1 || first_weekday > 7) {
    tf_msg_set(ch->msg, TWOFOLD_EINVAL,
               "first weekday %d is not an ISO weekday 1..7", first_weekday);
    return fail(ch, TWOFOLD_EINVAL);
  }
  if (n > TWOFOLD_CP_MAX_DAYS) {
    tf_msg_set(ch->msg, TWOFOLD_ETOOLARGE,
               "%zu days exceed the limit of %d days", n,
               TWOFOLD_CP_MAX_DAYS);
    return fail(ch, TWOFOLD_ETOOLARGE);
  }
  int rc = tf_cp_check_counts(y, n, ch->msg);
  if (rc)
    return fail(ch, rc);
  size_t present = 0;
  for (size_t i = 0; i < n; i++)
    present += !tf_isnan(y[i]);
  if (present < 2) {
    tf_msg_set(ch->msg, TWOFOLD_ENODATA,
               "%zu of %zu days have data; at least 2 are needed", present,
               n);
    return fail(ch, TWOFOLD_ENODATA);
  }
  if (!(ch->opt.mean_len > ch->opt.min_seg)) {
    tf_msg_set(ch->msg, TWOFOLD_ERANGE,
               "mean segment length %g days is not above the minimum %d",
               ch->opt.mean_len, ch->opt.min_seg);
    return fail(ch, TWOFOLD_ERANGE);
  }
  ch->n = n;
  double *yc = malloc(n * sizeof(double));
  if (!yc)
    return fail(ch, TWOFOLD_ENOMEM);
  memcpy(yc, y, n * sizeof(double));
  size_t ncl = ch->opt.clean ? tf_cp_clean(yc, n) : 0;
  present = 0;
  for (size_t i = 0; i < n; i++)
    present += !tf_isnan(yc[i]);
  if (present < 2) {
    free(yc);
    tf_msg_set(ch->msg, TWOFOLD_ENODATA,
               "%zu of %zu days have data after setting reporting "
               "artefacts missing; at least 2 are needed",
               present, n);
    return fail(ch, TWOFOLD_ENODATA);
  }
  rc = tf_cp_prepare(&ch->d, &ch->opt, yc, n, first_weekday);
  free(yc);
  ch->ncleaned = ncl;
  if (rc)
    return fail(ch, rc);
  /* the length tables of the last run serve again (a daily job over many
   * regions of the same length) */
  if (!(ch->lp.lg && ch->lp.n == n && ch->lp.min_seg == ch->opt.min_seg &&
        ch->lp.shape == ch->opt.shape && ch->lp.mean == ch->opt.mean_len)) {
    tf_lenprior_free(&ch->lp);
    rc = tf_lenprior_init(&ch->lp, n, ch->opt.min_seg, ch->opt.shape,
                          ch->opt.mean_len);
    if (rc)
      return fail(ch, rc);
  }
  rc = alloc_results(ch);
  if (rc)
    return fail(ch, rc);
  if (!(ch->opt.kind == TWOFOLD_CP_KINK && ch->opt.grid == 0))
    pool_free(ch); /* only KINK by Laplace messages uses the kept buffers */
  if (ch->opt.kind == TWOFOLD_CP_KINK)
    jbuf_free(ch); /* and only JUMP and LEVEL these */
  if (ch->opt.kind == TWOFOLD_CP_KINK && ch->opt.grid > 0) {
    rc = tf_kink_run(ch);
    if (rc)
      return fail(ch, rc);
  } else if (ch->opt.kind == TWOFOLD_CP_KINK) {
    rc = tf_kinkl_run(ch);
    if (rc)
      return fail(ch, rc);
  } else {
    ch->Q = malloc((n + 1) * sizeof(double));
    ch->stop = malloc(n * sizeof(size_t));
    ch->off = malloc(n * sizeof(size_t));
    if (!ch->Q || !ch->stop || !ch->off)
      return fail(ch, TWOFOLD_ENOMEM);
    rc = backward(ch);
    if (!rc)
      rc = tf_cp_results(ch, NULL, ch->jbuf[3]);
    if (rc)
      return fail(ch, rc);
  }
  ch->ok = 1;
  ch->status = 0;
  return 0;
}

/* ---- getters ------------------------------------------------------------ */

int twofold_changes_status(const twofold_changes *ch) {
  return ch ? ch->status : TWOFOLD_EINVAL;
}
const char *twofold_changes_errmsg(const twofold_changes *ch) {
  return ch ? ch->msg : "no changepoint object (NULL)";
}
size_t twofold_changes_length(const twofold_changes *ch) {
  return ch && ch->ok ? ch->n : 0;
}
int twofold_changes_kind(const twofold_changes *ch) {
  return ch && ch->ok ? ch->opt.kind : TWOFOLD_EINVAL;
}
double twofold_changes_dispersion(const twofold_changes *ch) {
  return ch && ch->ok ? ch->d.phi : NAN;
}
double twofold_changes_weekday_effect(const twofold_changes *ch,
                                      int weekday) {
  if (!ch || !ch->ok || weekday < 1 || weekday > 7)
    return NAN;
  return ch->d.delta[weekday - 1];
}
size_t twofold_changes_cleaned(const twofold_changes *ch) {
  return ch && ch->ok ? ch->ncleaned : 0;
}

double twofold_changes_log_evidence(const twofold_changes *ch) {
  if (!ch || !ch->ok)
    return NAN;
  return ch->logZ + ch->d.cconst[ch->n];
}

#define NEED_RUN(ch)                                                         \
  do {                                                                       \
    if (!(ch) || !(ch)->ok)                                                  \
      return TWOFOLD_EINVAL;                                                 \
  } while (0)

int twofold_changes_p_change(const twofold_changes *ch, double *p) {
  NEED_RUN(ch);
  if (p)
    memcpy(p, ch->pch, ch->n * sizeof(double));
  return 0;
}

/* Standard normal quantile (Acklam's rational approximation refined by
 * one Halley step on erfc; relative error below 1e-15). */
static double qnorm(double p) {
  static const double a[] = {-3.969683028665376e+01, 2.209460984245205e+02,
                             -2.759285104469687e+02, 1.383577518672690e+02,
                             -3.066479806614716e+01, 2.506628277459239e+00};
  static const double b[] = {-5.447609879822406e+01, 1.615858368580409e+02,
                             -1.556989798598866e+02, 6.680131188771972e+01,
                             -1.328068155288572e+01};
  static const double c[] = {-7.784894002430293e-03, -3.223964580411365e-01,
                             -2.400758277161838e+00, -2.549732539343734e+00,
                             4.374664141464968e+00, 2.938163982698783e+00};
  static const double dd[] = {7.784695709041462e-03, 3.224671290700398e-01,
                              2.445134137142996e+00, 3.754408661907416e+00};
  double q, x;
  if (p < 0.02425) {
    q = sqrt(-2 * log(p));
    x = (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q +
         c[5]) /
        ((((dd[0] * q + dd[1]) * q + dd[2]) * q + dd[3]) * q + 1);
  } else if (p > 1 - 0.02425) {
    q = sqrt(-2 * log1p(-p));
    x = -(((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q +
          c[5]) /
        ((((dd[0] * q + dd[1]) * q + dd[2]) * q + dd[3]) * q + 1);
  } else {
    q = p - 0.5;
    double r = q * q;
    x = (((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r +
         a[5]) *
        q /
        (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1);
  }
  double e = 0.5 * erfc(-x / sqrt(2)) - p;
  double u = e * 2.5066282746310002 * exp(x * x / 2);
  return x - u / (1 + x * u / 2);
}

int twofold_changes_growth(const twofold_changes *ch, double *mean,
                           double *lo, double *hi) {
  NEED_RUN(ch);
  double z = qnorm(0.5 + ch->opt.level / 2);
  for (size_t t = 0; t < ch->n; t++) {
    if (mean)
      mean[t] = ch->gmean[t];
    if (lo)
      lo[t] = ch->gmean[t] - z * ch->gsd[t];
    if (hi)
      hi[t] = ch->gmean[t] + z * ch->gsd[t];
  }
  return 0;
}

int twofold_changes_doubling(const twofold_changes *ch, double *time,
                             double *lo, double *hi, int *sense) {
  NEED_RUN(ch);
  double z = qnorm(0.5 + ch->opt.level / 2);
  for (size_t t = 0; t < ch->n; t++) {
    double m = ch->gmean[t], s = ch->gsd[t];
    double T, Tlo, Thi;
    int sg;
    if (twofold_doubling_time(m, m - z * s, m + z * s, &T, &Tlo, &Thi,
                              &sg) != TWOFOLD_OK) {
      /* no finite growth on that day (counts beyond what the segment fits
       * hold): unbounded, never NaN */
      T = Tlo = Thi = INFINITY;
      sg = 0;
    }
    if (time)
      time[t] = T;
    if (lo)
      lo[t] = Tlo;
    if (hi)
      hi[t] = Thi;
    if (sense)
      sense[t] = sg;
  }
  return 0;
}

int twofold_changes_count_prob(const twofold_changes *ch, double *p,
                               size_t size, double *tail) {
  NEED_RUN(ch);
  if (size > (size_t)ch->opt.max_changes + 1 || (size > 0 && !p))
    return TWOFOLD_EINVAL;
  double rest = ch->ktail;
  for (size_t m = 0; m <= (size_t)ch->opt.max_changes; m++) {
    if (m < size)
      p[m] = ch->kprob[m];
    else
      rest += ch->kprob[m];
  }
  if (tail)
    *tail = rest;
  return 0;
}

double twofold_changes_count_mean(const twofold_changes *ch) {
  return ch && ch->ok ? ch->kmean : NAN;
}

size_t twofold_changes_map_count(const twofold_changes *ch) {
  return ch && ch->ok ? ch->nmap : 0;
}

int twofold_changes_map_change(const twofold_changes *ch, size_t k,
                               size_t *day, size_t *from, size_t *to,
                               double *prob) {
  NEED_RUN(ch);
  if (k >= ch->nmap)
    return TWOFOLD_ENOTFOUND;
  size_t c = ch->mapstart[k + 1];
  /* bounds: midpoints to the neighbouring changes (or the series ends) */
  size_t lob = k == 0 ? 1 : (ch->mapstart[k] + c + 1) / 2;
  size_t hib = k + 1 == ch->nmap ? ch->n - 1 : (c + ch->mapstart[k + 2]) / 2;
  if (lob < 1)
    lob = 1;
  size_t a = c, b = c;
  double sum = ch->pch[c];
  while (sum < ch->opt.level && (a > lob || b < hib)) {
    double pl = a > lob ? ch->pch[a - 1] : -1;
    double pr = b < hib ? ch->pch[b + 1] : -1;
    if (pl >= pr) {
      a--;
      sum += pl;
    } else {
      b++;
      sum += pr;
    }
  }
  if (day)
    *day = c;
  if (from)
    *from = a;
  if (to)
    *to = b;
  if (prob)
    *prob = sum > 1 ? 1 : sum;
  return 0;
}

int twofold_changes_map_segment(const twofold_changes *ch, size_t k,
                                size_t *start, size_t *end, double *rate,
                                double *rate_lo, double *rate_hi,
                                double *level) {
  NEED_RUN(ch);
  if (k > ch->nmap)
    return TWOFOLD_ENOTFOUND;
  double z = qnorm(0.5 + ch->opt.level / 2);
  if (start)
    *start = ch->mapstart[k];
  if (end)
    *end = ch->mapstart[k + 1] - 1;
  if (rate)
    *rate = ch->mapb[k];
  if (rate_lo)
    *rate_lo = ch->mapb[k] - z * ch->mapbsd[k];
  if (rate_hi)
    *rate_hi = ch->mapb[k] + z * ch->mapbsd[k];
  if (level)
    *level = ch->maplvl[k];
  return 0;
}

int twofold_changes_shrink(twofold_changes *ch) {
  NEED_RUN(ch);
  if (!ch->cache_pooled) {
    free(ch->clogP);
    free(ch->cb);
    free(ch->cv);
  }
  ch->cache_pooled = 0;
  pool_free(ch);
  jbuf_free(ch);
  ch->clogP = ch->cb = ch->cv = NULL;
  ch->ncache = ch->capcache = 0;
  tf_kink_free(ch->kink);
  ch->kink = NULL;
  ch->shrunk = 1;
  return 0;
}

int twofold_changes_sample(const twofold_changes *ch, uint64_t seed,
                           size_t draws, unsigned char *change, double *rate,
                           size_t *count) {
  NEED_RUN(ch);
  if (ch->shrunk)
    return TWOFOLD_EINVAL;
  size_t n = ch->n;
  if (draws > 0 && n > SIZE_MAX / draws)
    return TWOFOLD_ETOOLARGE;
  if (ch->kink)
    return tf_kink_sample(ch, seed, draws, change, rate, count);
  tf_rng r;
  tf_rng_seed(&r, seed);
  int jump = ch->opt.kind != TWOFOLD_CP_LEVEL; /* KINK (Laplace): as JUMP */
  for (size_t dr = 0; dr < draws; dr++) {
    size_t s = 0, cnt = 0;
    if (change)
      memset(change + dr * n, 0, n);
    while (s < n) {
      /* draw the end of the segment starting at s (METHODS A2) */
      double u = tf_rng_unif(&r), acc = 0;
      size_t e = s, last = s;
      for (e = s; e <= ch->stop[s]; e++) {
        double lp = ch->clogP[cidx(ch, s, e)];
        if (lp == -INFINITY)
          continue;
        last = e;
        acc += exp(lp + seg_prior(ch, s, e) +
                   (e + 1 < n ? ch->Q[e + 1] : 0) - ch->Q[s]);
        if (acc >= u)
          break;
      }
      if (e > ch->stop[s])
        e = last;
      double b = 0;
      if (jump) {
        size_t k = cidx(ch, s, e);
        b = ch->cb[k] + sqrt(ch->cv[k]) * tf_rng_norm(&r);
      }
      cnt += tf_sample_put(n, dr, s, e, b, rate, change);
      s = e + 1;
    }
    if (count)
      count[dr] = cnt;
  }
  return 0;
}

int twofold_changes_segment_logml(const twofold_changes *ch, size_t start,
                                  size_t end, double *logml) {
  NEED_RUN(ch);
  if (ch->opt.kind == TWOFOLD_CP_KINK || !logml)
    return TWOFOLD_EINVAL;
  if (start > end || end >= ch->n)
    return TWOFOLD_ERANGE;
  if (ch->opt.kind == TWOFOLD_CP_LEVEL) {
    *logml = tf_seg_level(&ch->d, start, end, NULL);
  } else {
    double b = ch->d.rmean, v;
    *logml = tf_seg_jump_at(&ch->d, start, end, &b, &v, NULL);
  }
  return 0;
}

int twofold_changes_length_prior(const twofold_changes *ch, size_t len,
                                 int first, double *log_pmf,
                                 double *log_surv) {
  NEED_RUN(ch);
  if (len < 1 || len > ch->n)
    return TWOFOLD_ERANGE;
  size_t s = first ? 0 : 1;
  if (log_pmf)
    *log_pmf = tf_lg(&ch->lp, s, len);
  if (log_surv)
    *log_surv = tf_lsurv(&ch->lp, s, len);
  return 0;
}
