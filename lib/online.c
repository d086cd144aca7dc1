/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Online changepoint filter for KINK, JUMP and LEVEL segments (Fearnhead &
 * Liu 2007, JRSS B 69:589-605): the posterior of the start of the current
 * segment given the data so far, updated day by day (METHODS A4):
 *   w'(s) ~ w(s) S(l)/S(l-1) P(s,t)/P(s,t-1)      (segment goes on)
 *   w'(t) ~ P(t,t) sum_s w(s) g(l)/S(l-1)          (a new segment at t)
 * with l = t - s the current length, S(l) = P(length > l), g the length
 * pmf (first segment: the stationary law).  The sum of the w' is the
 * one-step predictive.  When the candidates exceed the maximum they are
 * reduced to half of it by stratified optimal resampling (Fearnhead &
 * Liu 2007, sec. 3), which keeps the expected weights unchanged.
 * KINK segments use the collapsed Laplace messages of kink_laplace.c: each
 * candidate carries the normal message of the level at its knot and its
 * segment fit; a new candidate's message is the mixture of the end levels
 * of the candidates, weighted by their new-segment mass, collapsed to its
 * mean and variance, as the offline recursion does, so without resampling
 * the filter reproduces the offline posterior (tests/check_changes.c).
 * JUMP candidates keep the power sums of their start (tf_psum), grown by a
 * day at each update, so an update costs no exponential per past day;
 * each candidate's fit starts from its last evaluation, the day before,
 * with the new day's term added (tf_seg_jump_ps).
 */

#include <gsl/gsl_sf_psi.h>
#include "cp.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

struct twofold_online {
  struct twofold_cp_options opt;
  tf_cpdata d;
  size_t cap;       /* capacity of the data arrays (days) */
  tf_lenprior lp;   /* tables up to lp.n */
  size_t t;         /* days added */
  size_t maxc;
  tf_rng rng;
  int have_beta;
  /* candidates: segment start, log weight (normalised), log P(s, t-1),
   * growth mode and variance */
  size_t nc;
  size_t *cs;
  double *cw, *clp, *cb, *cv;
  /* KINK: per candidate the message of its knot level and its fit */
  double *cmm, *cmv;
  tf_kfit *cf;
  /* JUMP: per candidate the power sums of its start (segment.c) */
  tf_psum *cps;
  double *sortbuf;
  double lpred;
  char msg[TF_ERRMSG_SIZE];
};

void twofold_online_free(twofold_online *on) {
  if (!on)
    return;
  tf_cp_data_free(&on->d);
  tf_lenprior_free(&on->lp);
  free(on->cs);
  free(on->cw);
  free(on->clp);
  free(on->cb);
  free(on->cv);
  free(on->cmm);
  free(on->cmv);
  free(on->cf);
  free(on->cps);
  free(on->sortbuf);
  free(on);
}

const char *twofold_online_errmsg(const twofold_online *on) {
  return on ? on->msg : "no online filter (NULL)";
}

static int grow_data(twofold_online *on, size_t need) {
  if (need <= on->cap)
    return 0;
  size_t cap = on->cap ? on->cap : 64;
  while (cap < need)
    cap *= 2;
  tf_cpdata *d = &on->d;
#define GROW(field, type, count)                                             \
  do {                                                                       \
    type *p_ = realloc(d->field, (count) * sizeof(type));                    \
    if (!p_)                                                                 \
      return TWOFOLD_ENOMEM;                                                 \
    d->field = p_;                                                           \
  } while (0)
  GROW(y, double, cap);
  GROW(cy, double, cap + 1);
  GROW(cty, double, cap + 1);
  GROW(cw, double, cap + 1);
  GROW(cconst, double, cap + 1);
  GROW(cmiss, size_t, cap + 1);
  GROW(miss, size_t, cap);
#undef GROW
  on->cap = cap;
  return 0;
}

static int grow_lenprior(twofold_online *on, size_t need) {
  if (on->lp.lg && need <= on->lp.n)
    return 0;
  size_t n = on->lp.n ? on->lp.n : 256;
  while (n < need)
    n *= 2;
  tf_lenprior lp;
  int rc = tf_lenprior_init(&lp, n, on->opt.min_seg, on->opt.shape,
                            on->opt.mean_len);
  if (rc)
    return rc;
  tf_lenprior_free(&on->lp);
  on->lp = lp;
  return 0;
}

static double seg_lp(twofold_online *on, size_t i, size_t s, size_t e,
                     double *b, double *v) {
  if (on->opt.kind == TWOFOLD_CP_KINK) {
    tf_kfit *f = &on->cf[i];
    double l = tf_seg_kink(&on->d, s, e, on->cmm[i], on->cmv[i], f);
    *b = f->b;
    *v = f->bvar;
    return l;
  }
  if (on->opt.kind == TWOFOLD_CP_LEVEL) {
    *b = 0;
    *v = 0;
    return tf_seg_level(&on->d, s, e, NULL);
  }
  return tf_seg_jump_ps(&on->d, &on->cps[i], e, b, v, NULL);
}

/* Candidate i moved to slot out (out <= i), weight included. */
static void move_candidate(twofold_online *on, size_t out, size_t i) {
  on->cs[out] = on->cs[i];
  on->cw[out] = on->cw[i];
  on->clp[out] = on->clp[i];
  on->cb[out] = on->cb[i];
  on->cv[out] = on->cv[i];
  if (on->cf) {
    on->cmm[out] = on->cmm[i];
    on->cmv[out] = on->cmv[i];
    on->cf[out] = on->cf[i];
  }
  if (on->cps)
    on->cps[out] = on->cps[i];
}

/* The candidates' log weights normalised (exact up to rounding). */
static void renormalise(twofold_online *on) {
  double lz = -INFINITY;
  for (size_t i = 0; i < on->nc; i++)
    lz = tf_lse(lz, on->cw[i]);
  for (size_t i = 0; i < on->nc; i++)
    on->cw[i] -= lz;
}

/* v[0..n-1] in descending order (insertion sort: n is at most the
 * candidate bound). */
static void sort_desc(double *v, size_t n) {
  for (size_t i = 1; i < n; i++) {
    double x = v[i];
    size_t j = i;
    while (j > 0 && v[j - 1] < x) {
      v[j] = v[j - 1];
      j--;
    }
    v[j] = x;
  }
}

/* Stratified optimal resampling of the candidates down to m (METHODS A4).
 * Weights are normalised (linear scale in sortbuf). */
static void sor(twofold_online *on, size_t m) {
  size_t nc = on->nc;
  double *w = on->sortbuf;
  for (size_t i = 0; i < nc; i++)
    w[i] = exp(on->cw[i]);
  /* sort a copy descending to find alpha */
  double *srt = w + nc;
  memcpy(srt, w, nc * sizeof(double));
  sort_desc(srt, nc);
  /* tails of the sorted weights summed from the smallest up: a running
   * difference from the total loses the small tails to rounding, and an
   * alpha far below the rounding error keeps every small weight (so the
   * candidates would never shrink) */
  double *sfx = srt + nc;
  sfx[nc] = 0;
  for (size_t i = nc; i-- > 0;)
    sfx[i] = sfx[i + 1] + srt[i];
  double alpha = sfx[0] / (double)m;
  for (size_t kk = 0; kk < m && kk < nc; kk++) {
    alpha = sfx[kk] / (double)(m - kk);
    if (srt[kk] < alpha)
      break;
    if (kk + 1 == m) /* m weights dominate: keep them, drop the rest */
      alpha = srt[kk];
  }
  double U = alpha * tf_rng_unif(&on->rng);
  size_t out = 0;
  for (size_t i = 0; i < nc; i++) { /* candidates are in order of start */
    double wi = w[i];
    int keep = 0;
    double nw = wi;
    if (wi == 0) {
      /* no mass (underflowed): never kept, so that a run of them cannot
       * stop the reduction when alpha comes out as 0 */
    } else if (wi >= alpha) {
      keep = 1;
    } else {
      U -= wi;
      if (U < 0) {
        keep = 1;
        nw = alpha;
        U += alpha;
      }
    }
    if (keep) {
      move_candidate(on, out, i);
      on->cw[out] = log(nw);
      out++;
    }
  }
  on->nc = out;
  renormalise(on);
}

/* Last resort after repeated SOR (rounding only): keep the m largest
 * weights (ties to the earlier start), renormalised. */
static void keep_largest(twofold_online *on, size_t m) {
  size_t nc = on->nc;
  double *srt = on->sortbuf;
  memcpy(srt, on->cw, nc * sizeof(double));
  sort_desc(srt, nc);
  double cut = srt[m - 1];
  size_t above = 0;
  for (size_t i = 0; i < nc; i++)
    above += on->cw[i] > cut;
  size_t ties = m - above, out = 0;
  for (size_t i = 0; i < nc; i++) {
    int keep = 0;
    if (on->cw[i] > cut) {
      keep = 1;
    } else if (on->cw[i] == cut && ties > 0) {
      keep = 1;
      ties--;
    }
    if (keep) {
      move_candidate(on, out, i);
      out++;
    }
  }
  on->nc = out;
  renormalise(on);
}

static int add_day(twofold_online *on, double y) {
  size_t t = on->t;
  int rc = grow_data(on, t + 1);
  if (!rc)
    rc = grow_lenprior(on, t + 2);
  if (rc)
    return tf_msg_set(on->msg, rc, "out of memory");
  tf_cpdata *d = &on->d;
  int m = tf_isnan(y);
  if (!m && !on->have_beta) {
    d->ybar = y + 0.5;
    d->beta = d->alpha / d->ybar;
    on->have_beta = 1;
    tf_cp_constants(d);
  }
  d->y[t] = y;
  if (m)
    d->miss[d->nmiss++] = t;
  d->cmiss[t + 1] = d->cmiss[t] + (size_t)m;
  d->cy[t + 1] = d->cy[t] + (m ? 0 : y);
  d->cty[t + 1] = d->cty[t] + (m ? 0 : (double)t * y);
  int c = tf_cls(d, t);
  d->cw[t + 1] = d->cw[t] + (m ? 0 : d->wcls[c]);
  double cst = m ? 0 : (y * d->delta[c] - tf_lgamma(y + 1)) / d->phi;
  d->cconst[t + 1] = d->cconst[t] + cst;
  d->n = t + 1;
  const tf_lenprior *lp = &on->lp;
  int kink = on->opt.kind == TWOFOLD_CP_KINK;
  if (t == 0) {
    double b = d->rmean, v = 0;
    if (kink) {
      /* knot 0: log lambda, lambda ~ Gamma(alpha, beta), as a normal */
      double beta = d->beta > 0 ? d->beta : d->alpha;
      on->cmm[0] = gsl_sf_psi(d->alpha) - log(beta);
      on->cmv[0] = gsl_sf_psi_1(d->alpha);
      on->cf[0] = (tf_kfit){.a = on->cmm[0], .b = d->rmean, .pa = NAN, .pb = NAN};
    }
    if (on->cps)
      tf_psum_init(&on->cps[0], 0, d->rmean);
    double l0 = seg_lp(on, 0, 0, 0, &b, &v);
    on->nc = 1;
    on->cs[0] = 0;
    on->cw[0] = 0;
    on->clp[0] = l0;
    on->cb[0] = b;
    on->cv[0] = v;
    on->lpred = l0 + cst;
    on->t = 1;
    return 0;
  }
  /* new-segment mass before the day's likelihood */
  double *hw = on->sortbuf;
  for (size_t i = 0; i < on->nc; i++) {
    size_t s = on->cs[i], l = t - s;
    double h = tf_lg(lp, s, l) - (s == 0 ? lp->lS0[l - 1] : lp->lS[l - 1]);
    hw[i] = on->cw[i] + h;
  }
  double lnew = tf_lse_array(hw, on->nc);
  /* KINK: the new candidate's message, from the end levels of the
   * candidates' fits to day t-1 (before they are updated) */
  double nm = NAN, nv = NAN;
  if (kink && lnew > -INFINITY) {
    double s0 = 0, s1 = 0, s2 = 0, ref = NAN;
    for (size_t i = 0; i < on->nc; i++) {
      if (hw[i] == -INFINITY || !isfinite(on->cf[i].xm) ||
          !isfinite(on->cf[i].xv))
        continue;
      double om = exp(hw[i] - lnew);
      if (isnan(ref))
        ref = on->cf[i].xm;
      double dx = on->cf[i].xm - ref;
      s0 += om;
      s1 += om * dx;
      s2 += om * (on->cf[i].xv + dx * dx);
    }
    double mu = s1 / s0, var = s2 / s0 - mu * mu;
    if (s0 > 0) {
      nm = ref + mu;
      nv = var > 1e-30 ? var : 1e-30;
    }
  }
  for (size_t i = 0; i < on->nc; i++) {
    size_t s = on->cs[i], l = t - s;
    const double *S = s == 0 ? lp->lS0 : lp->lS;
    double b = on->cb[i], v = on->cv[i];
    double lpn = seg_lp(on, i, s, t, &b, &v);
    double inc = lpn - on->clp[i]; /* NaN when both are -inf */
    on->cw[i] = on->cw[i] == -INFINITY || !(inc > -INFINITY)
                    ? -INFINITY
                    : on->cw[i] + S[l] - S[l - 1] + inc;
    on->clp[i] = lpn;
    on->cb[i] = b;
    on->cv[i] = v;
  }
  double b = d->rmean, v = 0;
  size_t k = on->nc;
  if (kink) {
    on->cmm[k] = isnan(nm) ? on->cmm[0] : nm;
    on->cmv[k] = isnan(nv) ? on->cmv[0] : nv;
    on->cf[k] = (tf_kfit){.a = on->cmm[k], .b = d->rmean, .pa = NAN, .pb = NAN};
  }
  if (on->cps)
    tf_psum_init(&on->cps[k], t, d->rmean);
  double l1 = seg_lp(on, k, t, t, &b, &v);
  on->nc++;
  on->cs[k] = t;
  on->cw[k] = lnew + l1;
  on->clp[k] = l1;
  on->cb[k] = b;
  on->cv[k] = v;
  double lz = tf_lse_array(on->cw, on->nc);
  if (lz == -INFINITY) {
    /* the day is impossible under every candidate (counts beyond what
     * the segment fits can hold): the filter starts again at this day,
     * with the day's predictive 0 */
    move_candidate(on, 0, k);
    on->nc = 1;
    on->cw[0] = 0;
    on->lpred = -INFINITY;
    on->t = t + 1;
    return 0;
  }
  for (size_t i = 0; i < on->nc; i++)
    on->cw[i] -= lz;
  on->lpred = lz + cst;
  on->t = t + 1;
  /* SOR keeps about m (at most m + 1 with exact arithmetic); never more
   * than the cap */
  for (int it = 0; on->nc > on->maxc && it < 16; it++)
    sor(on, on->maxc / 2 > 1 ? on->maxc / 2 : 1);
  if (on->nc > on->maxc)
    keep_largest(on, on->maxc);
  return 0;
}

int twofold_online_new(const twofold_cp_options *o, const double *history,
                       size_t n_history, int first_weekday,
                       size_t max_candidates, uint64_t seed,
                       twofold_online **out) {
  if (!out)
    return TWOFOLD_EINVAL;
  *out = NULL;
  struct twofold_cp_options opt;
  if (o)
    opt = *o;
  else
    tf_cp_options_defaults(&opt);
  if (first_weekday < 1 || first_weekday > 7 || max_candidates < 2 ||
      max_candidates > 100000 || (n_history > 0 && !history))
    return TWOFOLD_EINVAL;
  if (n_history > TWOFOLD_CP_MAX_DAYS)
    return TWOFOLD_ETOOLARGE;
  twofold_online *on = calloc(1, sizeof *on);
  if (!on)
    return TWOFOLD_ENOMEM;
  on->opt = opt;
  on->maxc = max_candidates;
  tf_rng_seed(&on->rng, seed);
  size_t mc = 2 * max_candidates + 2; /* room for SOR's rounding */
  on->cs = malloc(mc * sizeof(size_t));
  on->cw = malloc(mc * sizeof(double));
  on->clp = malloc(mc * sizeof(double));
  on->cb = malloc(mc * sizeof(double));
  on->cv = malloc(mc * sizeof(double));
  on->sortbuf = malloc((3 * mc + 1) * sizeof(double));
  if (opt.kind == TWOFOLD_CP_KINK) {
    on->cmm = malloc(mc * sizeof(double));
    on->cmv = malloc(mc * sizeof(double));
    on->cf = malloc(mc * sizeof(tf_kfit));
  }
  if (opt.kind == TWOFOLD_CP_JUMP)
    on->cps = malloc(mc * sizeof(tf_psum));
  if (!on->cs || !on->cw || !on->clp || !on->cb || !on->cv || !on->sortbuf ||
      (opt.kind == TWOFOLD_CP_KINK && (!on->cmm || !on->cmv || !on->cf)) ||
      (opt.kind == TWOFOLD_CP_JUMP && !on->cps)) {
    twofold_online_free(on);
    return TWOFOLD_ENOMEM;
  }
  int rc;
  if (n_history > 0) {
    rc = tf_cp_check_counts(history, n_history, on->msg);
    if (rc) {
      twofold_online_free(on);
      return rc;
    }
    tf_cpdata h;
    rc = tf_cp_prepare(&h, &opt, history, n_history, first_weekday);
    if (rc) {
      twofold_online_free(on);
      return rc;
    }
    memcpy(on->d.delta, h.delta, sizeof h.delta);
    on->d.phi = h.phi;
    on->d.beta = h.beta;
    on->have_beta = 1;
    tf_cp_data_free(&h);
  } else {
    on->d.phi = opt.phi > 0 ? opt.phi : 1;
    on->d.beta = opt.beta;
    on->have_beta = opt.beta > 0;
  }
  on->d.kind = opt.kind;
  on->d.cls0 = first_weekday - 1;
  on->d.alpha = opt.alpha;
  on->d.rmean = opt.rmean;
  on->d.rsd = opt.rsd;
  for (int c = 0; c < 7; c++)
    on->d.wcls[c] = exp(on->d.delta[c]);
  tf_cp_constants(&on->d);
  rc = grow_data(on, n_history > 0 ? n_history : 64);
  if (rc) {
    twofold_online_free(on);
    return rc;
  }
  on->d.cy[0] = on->d.cty[0] = on->d.cw[0] = on->d.cconst[0] = 0;
  on->d.cmiss[0] = 0;
  on->lpred = NAN;
  for (size_t i = 0; i < n_history; i++) {
    rc = add_day(on, history[i]);
    if (rc) {
      twofold_online_free(on);
      return rc;
    }
  }
  *out = on;
  return 0;
}

int twofold_online_add(twofold_online *on, double y) {
  if (!on)
    return TWOFOLD_EINVAL;
  on->msg[0] = '\0';
  if (!tf_count_ok(y))
    return tf_msg_set(on->msg, TWOFOLD_ECOUNT,
                      "day %zu: count %g is not a whole number in [0, 2^53] "
                      "or NaN",
                      on->t, y);
  if (on->t >= TWOFOLD_CP_MAX_DAYS)
    return tf_msg_set(on->msg, TWOFOLD_ETOOLARGE,
                      "the filter holds %d days, the limit",
                      TWOFOLD_CP_MAX_DAYS);
  return add_day(on, y);
}

size_t twofold_online_days(const twofold_online *on) {
  return on ? on->t : 0;
}
size_t twofold_online_candidates(const twofold_online *on) {
  return on ? on->nc : 0;
}

int twofold_online_p_recent(const twofold_online *on, size_t k, double *p) {
  if (!on || !p || k < 1)
    return TWOFOLD_EINVAL;
  if (on->t == 0)
    return tf_msg_set(((twofold_online *)on)->msg, TWOFOLD_ENODATA,
                      "no day added yet");
  double s = 0;
  for (size_t i = 0; i < on->nc; i++)
    if (on->cs[i] > 0 && on->cs[i] + k >= on->t)
      s += exp(on->cw[i]);
  *p = s > 1 ? 1 : s;
  return 0;
}

int twofold_online_growth(const twofold_online *on, double *mean, double *lo,
                          double *hi) {
  if (!on)
    return TWOFOLD_EINVAL;
  if (on->t == 0)
    return TWOFOLD_ENODATA;
  double m = 0, m2 = 0;
  for (size_t i = 0; i < on->nc; i++) {
    double w = exp(on->cw[i]);
    m += w * on->cb[i];
    m2 += w * (on->cb[i] * on->cb[i] + on->cv[i]);
  }
  double v = m2 - m * m, sd = v > 0 ? sqrt(v) : 0;
  /* z of the credible level: the same quantile as the offline getters */
  double z = 0;
  {
    double lv = on->opt.level, a = 0, b = 40;
    for (int it = 0; it < 200; it++) { /* bisection on erf */
      double c = 0.5 * (a + b);
      if (erf(c / 1.4142135623730951) < lv)
        a = c;
      else
        b = c;
    }
    z = 0.5 * (a + b);
  }
  if (mean)
    *mean = m;
  if (lo)
    *lo = m - z * sd;
  if (hi)
    *hi = m + z * sd;
  return 0;
}

double twofold_online_log_predictive(const twofold_online *on) {
  return on ? on->lpred : NAN;
}
