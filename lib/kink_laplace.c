/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * KINK changepoints by collapsed Laplace messages (the default method;
 * twofold_cp_options_set_grid(o, 0)).
 *
 * In a kink model the log-level eta_t is continuous at every change: knot
 * j sits at day j-1 (knot 0 before the first day) and segment [s, e] has
 * eta_t = x_s + b (t - s + 1) with its own growth rate b ~ N(mean, sd^2),
 * so the segment ends at knot e+1 with x_{e+1} = x_s + b (e - s + 1).
 * Segments are not independent and the recursions of Fearnhead (2006,
 * Statistics and Computing 16:203-213) do not apply as they stand.
 * Following Fearnhead & Liu (2011, Statistics and Computing 21:217-229),
 * who carry the parameter shared at a change from one segment to the
 * next, the filtered distribution of the shared level at knot s,
 *
 *     x_s | y_{0..s-1}, a change at day s   ~   N(m_s, v_s),
 *
 * is carried forward as one normal: the mixture over where the previous
 * segment started is collapsed to its mean and variance (moment matching,
 * as in the class II multi-process models of Harrison & Stevens 1976,
 * JRSS B 38:205-247).  Segment [s, e] then has the marginal likelihood
 *
 *     P(s, e) = integral of prod_t Pois(y_t; e^{eta_t + delta_t})^{1/phi}
 *               N(x_s; m_s, v_s) N(b; mean, sd^2) dx_s db
 *
 * by the two-dimensional Laplace approximation (METHODS B4: Newton on
 * (x_s, b) with the weekday-class geometric sums of B2-B3, O(7) per
 * evaluation, warm-started from [s, e-1]), whose normal posterior also
 * gives the segment's growth rate and the end level x_{e+1} for the next
 * message.  With these P(s, e) the posterior is that of independent
 * segments, so the exact forward, backward, count, most-probable and
 * sampling recursions of the JUMP and LEVEL kinds are reused unchanged.
 *
 * The approximations, both measured in tests/check_changes.c against
 * enumeration over every segmentation with fine quadrature over the knot
 * levels, and against the grid method on long series: (1) Laplace in
 * (x_s, b), whose relative error falls with the counts; (2) one normal per
 * knot instead of the mixture over earlier segmentations, so a segment's
 * prior level is conditioned on the data before it but not on where the
 * earlier changes were; the data after a change do not inform the growth
 * rate before it.
 *
 * Pruning, in the forward direction because the messages are built
 * forward: a start s whose filtered weight (the probability that the
 * segment covering day e started at s, given the days up to e) has been
 * below the pruning threshold times the total for 14 days running, and
 * whose segment is at least the minimum length, is dropped for good.  The
 * error this causes is measured by bench-cp --part prune.
 */
#include "cp.h"

#include <gsl/gsl_sf_psi.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define KL_PRUNE_RUN 14
#define KL_CACHE_LIMIT ((size_t)200000000)

typedef tf_kfit kl_fit;

/* f(a, b) = [a Y + b S1 - e^a E0(b)] / phi + log priors (without their
 * normalising constants); the gradient and the negative Hessian. */
typedef struct kl_eval {
  double f, ga, gb, haa, hab, hbb, det;
} kl_eval;

static void kl_evaluate(const tf_cpdata *d, size_t s, size_t e, double c,
                        double Y, double S1, double m, double v, double a,
                        double b, kl_eval *r) {
  double lE0, m1, m2;
  tf_esums(d, s, e, c, b, &lE0, &m1, &m2);
  double phi = d->phi, rsd2 = d->rsd * d->rsd;
  double A = lE0 == -INFINITY ? 0 : exp(a + lE0);
  double P = A / phi;
  double za = a - m, zb = b - d->rmean;
  r->f = (a * Y + b * S1) / phi - P - 0.5 * za * za / v -
         0.5 * zb * zb / rsd2;
  if (!isfinite(r->f)) {
    r->f = -INFINITY;
    return;
  }
  double V = m2 - m1 * m1;
  if (V < 0)
    V = 0;
  r->ga = Y / phi - P - za / v;
  r->gb = S1 / phi - P * m1 - zb / rsd2;
  r->haa = P + 1 / v;
  r->hab = P * m1;
  r->hbb = P * m2 + 1 / rsd2;
  /* haa hbb - hab^2 as a sum of positive terms (METHODS B4) */
  r->det = P * P * V + P / rsd2 + P * m2 / v + 1 / (v * rsd2);
}

double tf_seg_kink(const tf_cpdata *d, size_t s, size_t e, double m,
                         double v, kl_fit *fit) {
  double c = (double)s - 1;
  double Y = tf_sumy(d, s, e), S1 = tf_sumty(d, s, e) - c * Y;
  double L = (double)(e - s + 1);
  double a = isfinite(fit->a) ? fit->a : m;
  double b = isfinite(fit->b) ? fit->b : d->rmean;
  if (isfinite(fit->pa) && isfinite(fit->a) && isfinite(fit->b) &&
      fabs(fit->a - fit->pa) < 1 && fabs(fit->b - fit->pb) < 0.1) {
    /* warm start: the modes of [s, e-2] and [s, e-1] extrapolated (not
     * after a large move) */
    a += fit->a - fit->pa;
    b += fit->b - fit->pb;
  }
  fit->pa = fit->a;
  fit->pb = fit->b;
  kl_eval r, rn;
  kl_evaluate(d, s, e, c, Y, S1, m, v, a, b, &r);
  if (r.f == -INFINITY) {
    a = m;
    b = d->rmean;
    kl_evaluate(d, s, e, c, Y, S1, m, v, a, b, &r);
  }
  double f = r.f;
  if (f == -INFINITY)
    goto fallback;
  for (int it = 0; it < 100; it++) {
    double da = (r.hbb * r.ga - r.hab * r.gb) / r.det;
    double db = (r.haa * r.gb - r.hab * r.ga) / r.det;
    if (!isfinite(da) || !isfinite(db))
      goto fallback;
    /* Newton decrement: f rises by about lambda2 / 2 to the mode */
    double lambda2 = r.ga * da + r.gb * db;
    if (lambda2 < 1e-6) {
      /* converged: take the quadratic model's step and maximum (error
       * O(lambda^3) in f, below 1e-9, with the Hessian of the last
       * point) */
      f += 0.5 * lambda2;
      a += da;
      b += db;
      break;
    }
    /* a trust region: at most 5 in the log-level and 1 in the growth
     * rate per step, so that no step leaves the range where the sums are
     * finite */
    double t = 1;
    if (fabs(da) > 5)
      t = 5 / fabs(da);
    if (fabs(t * db) > 1)
      t = 1 / fabs(db);
    int h = 0;
    for (;;) {
      kl_evaluate(d, s, e, c, Y, S1, m, v, a + t * da, b + t * db, &rn);
      if (rn.f >= f - 1e-12 * fabs(f) || h >= 50)
        break;
      t *= 0.5;
      h++;
    }
    if (!(rn.f >= f - 1e-12 * fabs(f)))
      break; /* no ascent left: at the mode to double precision */
    a += t * da;
    b += t * db;
    r = rn;
    f = rn.f;
  }
  {
    double va = r.hbb / r.det, vb = r.haa / r.det, cab = -r.hab / r.det;
    double xv = va + L * L * vb + 2 * L * cab;
    /* N(a) N(b) (2 pi)^-1 against the Laplace (2 pi)^+1: they cancel */
    double lp = f - 0.5 * log(v * d->rsd * d->rsd * r.det);
    if (isfinite(lp) && isfinite(a) && isfinite(b) && isfinite(vb) &&
        vb > 0 && isfinite(xv)) {
      fit->a = a;
      fit->b = b;
      fit->bvar = vb;
      fit->xm = a + b * L;
      fit->xv = xv > 1e-30 ? xv : 1e-30;
      return lp;
    }
  }
fallback:
  /* no usable mode (counts and priors far apart beyond double range): the
   * segment is taken as impossible, and the next warm start begins from
   * the prior */
  fit->a = m;
  fit->b = d->rmean;
  fit->pa = fit->pb = NAN;
  fit->bvar = d->rsd * d->rsd;
  fit->xm = m + d->rmean * L;
  fit->xv = v + L * L * d->rsd * d->rsd;
  return -INFINITY;
}

/* e-major entries before they are put in per-start order. */
typedef struct kl_entries {
  size_t n, cap;
  size_t *s;
  double *lp, *b, *v;
} kl_entries;

static int kl_push(kl_entries *E, size_t s, double lp, double b, double v,
                   char *msg) {
  if (E->n == E->cap) {
    size_t cap = E->cap ? 2 * E->cap : 4096;
    if (cap > KL_CACHE_LIMIT)
      cap = KL_CACHE_LIMIT;
    if (cap <= E->n)
      return tf_msg_set(msg, TWOFOLD_ETOOLARGE,
                        "more than %zu candidate segments survive pruning; "
                        "raise the pruning threshold or shorten the series",
                        (size_t)KL_CACHE_LIMIT);
    size_t *ns = realloc(E->s, cap * sizeof *ns);
    if (!ns)
      return TWOFOLD_ENOMEM;
    E->s = ns;
    double *p = realloc(E->lp, cap * sizeof *p);
    if (!p)
      return TWOFOLD_ENOMEM;
    E->lp = p;
    p = realloc(E->b, cap * sizeof *p);
    if (!p)
      return TWOFOLD_ENOMEM;
    E->b = p;
    p = realloc(E->v, cap * sizeof *p);
    if (!p)
      return TWOFOLD_ENOMEM;
    E->v = p;
    E->cap = cap;
  }
  E->s[E->n] = s;
  E->lp[E->n] = lp;
  E->b[E->n] = b;
  E->v[E->n] = v;
  E->n++;
  return 0;
}

static void kl_entries_free(kl_entries *E) {
  free(E->s);
  free(E->lp);
  free(E->b);
  free(E->v);
}

/* Working state of the forward pass. */
typedef struct kl_work {
  double *mm, *mv;   /* message per knot, n+1                    */
  size_t *act;       /* active starts, increasing                */
  size_t *run;       /* days below the pruning bound, per start  */
  kl_fit *fit;       /* warm starts, per start                   */
  double *ws, *wx, *wv; /* per active start: weights, x mean, var */
  double *sv;        /* per active start: filtered weight        */
} kl_work;

static void kl_work_free(kl_work *w) {
  free(w->mm);
  free(w->mv);
  free(w->act);
  free(w->run);
  free(w->fit);
  free(w->ws);
  free(w->wx);
  free(w->wv);
  free(w->sv);
}

/* The forward pass: messages, Fa, the e-major cache and stop[]. */
static int kl_forward(twofold_changes *ch, kl_work *w, kl_entries *E) {
  const tf_cpdata *d = &ch->d;
  const tf_lenprior *lp = &ch->lp;
  size_t n = ch->n, na = 0;
  double leps = ch->opt.prune > 0 ? log(ch->opt.prune) : -INFINITY;
  for (size_t i = 0; i <= n; i++)
    ch->Fa[i] = -INFINITY;
  ch->Fa[0] = 0;
  /* knot 0: log lambda with lambda ~ Gamma(alpha, beta), as a normal */
  w->mm[0] = gsl_sf_psi(d->alpha) - log(d->beta);
  w->mv[0] = gsl_sf_psi_1(d->alpha);
  for (size_t e = 0; e < n; e++) {
    if (ch->Fa[e] > -INFINITY) {
      w->act[na] = e;
      w->run[e] = 0;
      w->fit[e].a = w->mm[e];
      w->fit[e].b = d->rmean;
      w->fit[e].pa = w->fit[e].pb = NAN;
      na++;
    }
    double tot = -INFINITY;
    for (size_t i = 0; i < na; i++) {
      size_t s = w->act[i], L = e - s + 1;
      kl_fit *f = &w->fit[s];
      double lps = tf_seg_kink(d, s, e, w->mm[s], w->mv[s], f);
      int rc = kl_push(E, s, lps, f->b, f->bvar, ch->msg);
      if (rc)
        return rc;
      ch->stop[s] = e;
      double wk = -INFINITY;
      if (e + 1 < n) {
        wk = ch->Fa[s] + lps + tf_lg(lp, s, L);
        ch->Fa[e + 1] = tf_lse(ch->Fa[e + 1], wk);
      }
      w->ws[i] = wk;
      w->wx[i] = f->xm;
      w->wv[i] = f->xv;
      /* filtered weight of "the segment covering day e started at s" */
      double sv = ch->Fa[s] + lps + tf_lsurv(lp, s, L);
      tot = tf_lse(tot, sv);
      w->sv[i] = sv;
    }
    /* the message at knot e+1: the mixture over s, collapsed */
    if (e + 1 < n && ch->Fa[e + 1] > -INFINITY) {
      double F = ch->Fa[e + 1], s0 = 0, s1 = 0, s2 = 0, ref = NAN;
      for (size_t i = 0; i < na; i++) {
        if (w->ws[i] == -INFINITY || !isfinite(w->wx[i]) ||
            !isfinite(w->wv[i]))
          continue;
        double om = exp(w->ws[i] - F);
        if (isnan(ref))
          ref = w->wx[i];
        double dx = w->wx[i] - ref;
        s0 += om;
        s1 += om * dx;
        s2 += om * (w->wv[i] + dx * dx);
      }
      double mu = s1 / s0;
      double var = s2 / s0 - mu * mu;
      w->mm[e + 1] = s0 > 0 ? ref + mu : w->mm[0];
      w->mv[e + 1] = s0 > 0 ? (var > 1e-30 ? var : 1e-30) : w->mv[0];
    }
    /* pruning */
    if (e + 1 < n && leps > -INFINITY && tot > -INFINITY) {
      size_t k = 0;
      for (size_t i = 0; i < na; i++) {
        size_t s = w->act[i], L = e - s + 1;
        double sv = w->sv[i];
        if (L >= (size_t)ch->opt.min_seg && sv < leps + tot) {
          if (++w->run[s] >= KL_PRUNE_RUN)
            continue; /* dropped */
        } else {
          w->run[s] = 0;
        }
        w->act[k++] = s;
      }
      na = k;
    }
  }
  return 0;
}

int tf_kinkl_run(twofold_changes *ch) {
  size_t n = ch->n;
  kl_work w;
  kl_entries E;
  memset(&w, 0, sizeof w);
  memset(&E, 0, sizeof E);
  int rc = TWOFOLD_ENOMEM;
  ch->Q = malloc((n + 1) * sizeof(double));
  ch->Fa = malloc((n + 1) * sizeof(double));
  ch->stop = malloc(n * sizeof(size_t));
  ch->off = malloc(n * sizeof(size_t));
  w.mm = malloc((n + 1) * sizeof(double));
  w.mv = malloc((n + 1) * sizeof(double));
  w.act = malloc(n * sizeof(size_t));
  w.run = malloc(n * sizeof(size_t));
  w.fit = malloc(n * sizeof(kl_fit));
  w.ws = malloc(n * sizeof(double));
  w.wx = malloc(n * sizeof(double));
  w.wv = malloc(n * sizeof(double));
  w.sv = malloc(n * sizeof(double));
  size_t *cnt = NULL;
  if (!ch->Q || !ch->Fa || !ch->stop || !ch->off || !w.mm || !w.mv ||
      !w.act || !w.run || !w.fit || !w.ws || !w.wx || !w.wv || !w.sv)
    goto out;
  for (size_t s = 0; s < n; s++)
    ch->stop[s] = SIZE_MAX; /* never started */
  rc = kl_forward(ch, &w, &E);
  if (rc)
    goto out;
  /* per-start layout: start s holds e = s..stop[s]; a start that never
   * became a candidate holds one impossible entry */
  rc = TWOFOLD_ENOMEM;
  cnt = calloc(n, sizeof *cnt);
  if (!cnt)
    goto out;
  size_t total = 0;
  for (size_t s = 0; s < n; s++) {
    if (ch->stop[s] == SIZE_MAX)
      ch->stop[s] = s;
    ch->off[s] = total;
    total += ch->stop[s] - s + 1;
  }
  ch->clogP = malloc(total * sizeof(double));
  ch->cb = malloc(total * sizeof(double));
  ch->cv = malloc(total * sizeof(double));
  if (!ch->clogP || !ch->cb || !ch->cv)
    goto out;
  ch->ncache = ch->capcache = total;
  for (size_t i = 0; i < total; i++) {
    ch->clogP[i] = -INFINITY;
    ch->cb[i] = 0;
    ch->cv[i] = 0;
  }
  for (size_t i = 0; i < E.n; i++) {
    size_t s = E.s[i], k = ch->off[s] + cnt[s]++;
    ch->clogP[k] = E.lp[i];
    ch->cb[k] = E.b[i];
    ch->cv[k] = E.v[i];
  }
  /* backward over the cache (METHODS A2) */
  ch->Q[n] = 0;
  for (size_t t = n; t-- > 0;) {
    double acc = -INFINITY;
    for (size_t e = t; e <= ch->stop[t]; e++) {
      double l = ch->clogP[ch->off[t] + (e - t)];
      if (l == -INFINITY)
        continue;
      size_t L = e - t + 1;
      double pr = e + 1 < n ? tf_lg(&ch->lp, t, L) : tf_lsurv(&ch->lp, t, L);
      acc = tf_lse(acc, l + pr + ch->Q[e + 1]);
    }
    ch->Q[t] = acc;
  }
  if (!(ch->Q[0] > -INFINITY)) {
    rc = tf_msg_set(ch->msg, TWOFOLD_ENOCONV,
                    "no segmentation of the %zu days has a finite "
                    "likelihood",
                    n);
    goto out;
  }
  rc = tf_cp_results(ch);
  if (rc)
    goto out;
  /* levels of the most probable segments: the count at the middle day
   * from the segment's own fit */
  for (size_t j = 0; j <= ch->nmap; j++) {
    size_t s = ch->mapstart[j], e = ch->mapstart[j + 1] - 1;
    size_t mid = (s + e) / 2;
    kl_fit f = {NAN, NAN, NAN, NAN, 0, 0, 0};
    (void)tf_seg_kink(&ch->d, s, e, w.mm[s], w.mv[s], &f);
    ch->maplvl[j] = exp(f.a + f.b * ((double)mid - (double)s + 1));
  }
  rc = 0;
out:
  free(cnt);
  kl_work_free(&w);
  kl_entries_free(&E);
  return rc;
}
