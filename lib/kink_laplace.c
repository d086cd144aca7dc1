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
 * (x_s, b)), whose normal posterior also gives the segment's growth rate
 * and the end level x_{e+1} for the next message.
 *
 * Cost per candidate segment.  The knot, and so the origin u = t - s + 1
 * of the sums E_k = sum w_t u^k e^{b u}, is fixed per start while the end
 * grows, so each start keeps power sums A_k at a reference growth rate
 * (tf_ksums: a day added in O(19), no exp), from which E0..E3 at b near
 * the reference follow by a Taylor series whose truncation is bounded
 * below the unit roundoff (see "incremental power sums" below; the
 * sums are rebuilt, O(L), when b leaves the band, and the closed forms
 * of METHODS B2-B3, tf_esums, take over where |b| L is too large for
 * them).  The fit of [s, e] starts from that of [s, e-1] moved by one
 * Newton step for the new day's term, with the kept Hessian and the
 * second-order term from E3, so that about 96% of the candidates need
 * one evaluation (the Newton decrement below 1e-6 at once); a Newton
 * that fails or stalls is retried from the level of the data with the
 * closed forms.  e^a comes from an exact e^{a0} by a short series while
 * |a - a0| <= 0.02.  The forward sums over the starts take one exp per
 * candidate (the filtered weights against their largest; the
 * new-segment weights are these times the tabled hazard); the pass keeps
 * these weights, so that the backward pass is one in probabilities,
 * without an exp (tf_kinkl_run).  The fit's usual path (the warm start,
 * one evaluation, converged) is inline; the rest (further Newton steps,
 * the retry, the fallback) is kl_rest.  The forward pass takes the fits
 * of eight starts at a time part by part (the power sums and warm starts
 * of all eight, then their evaluations, then their ends), which gives
 * the processor independent work where one fit is a chain of dependent
 * steps: the same operations, about 9% less time.  With these P(s, e) the posterior
 * is that of independent segments, so the count, most-probable and
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
/* starts whose fits the forward pass takes part by part together (kl_begin) */
#define KL_CHUNK 8
#define KL_CACHE_LIMIT ((size_t)200000000)
/* series up to this length have their segment cache written in place */
#define KL_DIRECT_DAYS 2048

typedef tf_kfit kl_fit;

/* f(a, b) = [a Y + b S1 - e^a E0(b)] / phi + log priors (without their
 * normalising constants); the gradient and the negative Hessian. */
typedef struct kl_eval {
  double f, ga, gb, haa, hab, hbb, det;
  double p3; /* e^a E3 / phi, for the next warm start (NAN: none) */
} kl_eval;

static void kl_evaluate(const tf_cpdata *d, size_t s, size_t e, double c,
                        double Y, double S1, double m, double v, double a,
                        double b, kl_eval *r) {
  double lE0, m1, m2;
  r->p3 = NAN;
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

/* ---- incremental power sums (tf_ksums) ---------------------------------
 *
 * For a start s the sums A_k = sum_t w_t u^k e^{bref u}, u = t - s + 1,
 * over the present days of [s, e] take O(K) to extend by a day, and
 *
 *     E_j(b) = sum_k (b - bref)^k / k!  A_{j+k},   j = 0, 1, 2,
 *
 * a Taylor series in b - bref.  With delta = |b - bref| L (L = e - s + 1,
 * so |b - bref| u <= delta for every day), the remainder after n terms is
 * at most delta^n / n! e^delta A_j, and E_j >= e^-delta A_j, so n terms
 * with delta^n / n! e^{2 delta} <= 2^-53 (the table below) leave a
 * relative truncation error in E_j below the unit roundoff.  The factor
 * e^{bref u} is carried by multiplication with e^{bref} and recomputed
 * by exp every KL_Z_EXACT days (relative drift at most 2 KL_Z_EXACT ulp).
 * The error of e^a E0 / phi in f is then a few ulp times (e^{2 delta} +
 * 2 KL_Z_EXACT) of P itself, i.e. at most about 1e-14 P: 1e-9 for a
 * segment holding 1e5 (tempered) counts.  When b leaves the band
 * (delta > kl_band[TF_KS_TERMS]) the sums are rebuilt at bref = b, O(L).
 * The day's powers and the shift are the primitives JUMP's tf_psum uses
 * too (tf_pow_add, tf_pow_shift4 in cp.h), here unscaled (u^k) and with
 * E0..E3 about the knot. */
#define KL_Z_EXACT 8
/* |bref| L beyond which the closed forms of tf_esums take over (the sums
 * would hold numbers near the double range) */
#define KL_BREF_RANGE 300.0
#define KL_KS_MAXLEN 20000

/* kl_band[n]: the largest delta for n terms (delta^n/n! e^{2 delta} <=
 * 2^-53), rounded down */
static const double kl_band[TF_KS_TERMS + 1] = {
    0,         1.1e-16,  1.49e-8, 8.73e-6, 2.27e-4, 1.677e-3,
    6.549e-3,  1.768e-2, 3.778e-2, 6.892e-2, 0.1123, 0.1687,
    0.2380,    0.3197,   0.4132,  0.5177,  0.6324};

/* Day t (class cl) added to the sums of the start s (tf_pow_add, cp.h). */
static void ks_add(const tf_cpdata *d, tf_ksums *ks, size_t s, size_t t,
                   int cl) {
  size_t iu = t - s + 1;
  double u = (double)iu;
  if (iu % KL_Z_EXACT == 0)
    ks->z = exp(ks->bref * u);
  else
    ks->z *= ks->eb;
  if (tf_isnan(d->y[t]))
    return;
  tf_pow_add(ks->A, TF_KS_TERMS + 3, d->wcls[cl] * ks->z, u);
}

/* The sums of the days s..e at bref, from scratch: the weights w_t
 * e^{bref u} first, in blocks of 64 days (e^{bref u} as ks_add carries
 * it), then each day's powers formed as ks_add forms them, summed in
 * registers by pairs and added to A once per block. */
static void ks_build(const tf_cpdata *d, tf_ksums *ks, size_t s, size_t e,
                     double bref) {
  _Static_assert(TF_KS_TERMS + 3 == 19, "ks_build sums 19 powers");
  memset(ks->A, 0, sizeof ks->A);
  ks->bref = bref;
  ks->eb = exp(bref);
  double z = 1, c[64], uu[64];
  int cl = tf_cls(d, s);
  double *A = ks->A;
  for (size_t t0 = s; t0 <= e; t0 += 64) {
    size_t m = e - t0 + 1 < 64 ? e - t0 + 1 : 64;
    for (size_t i = 0; i < m; i++) {
      size_t t = t0 + i, iu = t - s + 1;
      if (iu % KL_Z_EXACT == 0)
        z = exp(bref * (double)iu);
      else
        z *= ks->eb;
      c[i] = tf_isnan(d->y[t]) ? 0 : d->wcls[cl] * z;
      uu[i] = (double)iu;
      ks->cls = cl;
      cl = cl == 6 ? 0 : cl + 1;
    }
    /* sums of the powers 2j, 2j+1 (j < 9) and of the power 18 */
    tf_v2d sp[9] = {{0, 0}};
    double s18 = 0;
    for (size_t i = 0; i < m; i++) {
      tf_v2d w[10];
      tf_pow_terms(w, 10, c[i], uu[i]);
#pragma GCC unroll 9
      for (int j = 0; j < 9; j++)
        sp[j] += w[j];
      s18 += w[9][0];
    }
#pragma GCC unroll 9
    for (int j = 0; j < 9; j++)
      tf_v2d_addto(A + 2 * j, sp[j]);
    A[18] += s18;
  }
  ks->z = z;
  ks->e = e;
  ks->live = 1;
}

static void ks_extend(const tf_cpdata *d, tf_ksums *ks, size_t s, size_t e) {
  for (size_t t = ks->e + 1; t <= e; t++) {
    int cl = ks->cls == 6 ? 0 : ks->cls + 1;
    ks_add(d, ks, s, t, cl);
    ks->cls = cl;
  }
  ks->e = e;
}

/* One segment's evaluation context. */
typedef struct kl_ctx {
  const tf_cpdata *d;
  size_t s, e;
  double c, Y, S1, m, v, L;
  double iphi, iv, irsd2;
  tf_ksums *ks; /* NULL: the closed forms of tf_esums */
  double a0, ea0; /* e^{a0}, exact, for e^a near a0 */
} kl_ctx;

/* E0, E1, E2 at b from the power sums; 0 when they do not apply (b too
 * far from any reference the sums can hold, or no present day). */
static inline int ks_sums(kl_ctx *x, double b, double *E) {
  tf_ksums *ks = x->ks;
  double dx = b - ks->bref, delta = fabs(dx) * x->L;
  int n;
  if (delta <= kl_band[TF_KS_TERMS]) {
    /* 12 terms while they suffice (delta <= 0.238), else all 16: a few
     * more terms than the fewest, but the same count for most of the
     * evaluations, so that the processor predicts the series' loop (7%
     * less time than the fewest terms found by a search) */
    n = kl_band[12] >= delta ? 12 : TF_KS_TERMS;
  } else {
    if (!(fabs(b) * x->L <= KL_BREF_RANGE))
      return 0;
    ks_build(x->d, ks, x->s, x->e, b);
    dx = 0;
    n = 1;
  }
  tf_pow_shift4(ks->A, n, dx, E);
  return E[0] > 0 && E[2] - E[2] == 0;
}

static inline void kl_eval_at(kl_ctx *x, double a, double b, kl_eval *r) {
  double E[4];
  if (x->ks && ks_sums(x, b, E)) {
    double za = a - x->a0, ea;
    if (fabs(za) <= 0.02) {
      ea = x->ea0 * tf_expsmall(za);
    } else {
      x->a0 = a;
      x->ea0 = ea = exp(a);
    }
    /* P = e^a E0 / phi, P m1 = e^a E1 / phi, P m2 = e^a E2 / phi and
     * P^2 V = P P m2 - (P m1)^2: no division */
    double ep = ea * x->iphi;
    double P = ep * E[0], P1 = ep * E[1], P2 = ep * E[2];
    double zm = a - x->m, zb = b - x->d->rmean;
    r->f = (a * x->Y + b * x->S1) * x->iphi - P - 0.5 * zm * zm * x->iv -
           0.5 * zb * zb * x->irsd2;
    if (tf_finite2(r->f, P2 * P)) {
      double V = P * P2 - P1 * P1; /* P^2 V */
      if (V < 0)
        V = 0;
      r->ga = x->Y * x->iphi - P - zm * x->iv;
      r->gb = x->S1 * x->iphi - P1 - zb * x->irsd2;
      r->haa = P + x->iv;
      r->hab = P1;
      r->hbb = P2 + x->irsd2;
      /* haa hbb - hab^2 as a sum of positive terms (METHODS B4) */
      r->p3 = ep * E[3];
      r->det = V + P * x->irsd2 + P2 * x->iv + x->iv * x->irsd2;
      return;
    }
  }
  kl_evaluate(x->d, x->s, x->e, x->c, x->Y, x->S1, x->m, x->v, a, b, r);
}

/* The end of a fit at the mode (a, b), f the maximum of the log density
 * there and r its evaluation (idet = 1 / r->det): the Laplace log
 * marginal, with the fit's state updated; NAN when something is not
 * finite (the fit then unchanged). */
static inline double kl_finish(const tf_cpdata *d, size_t e, double v,
                               double L, kl_fit *fit, const kl_ctx *x,
                               double a, double b, double f,
                               const kl_eval *r, double idet) {
  double va = r->hbb * idet, vb = r->haa * idet, cab = -r->hab * idet;
  double xv = va + L * L * vb + 2 * L * cab;
  /* N(a) N(b) (2 pi)^-1 against the Laplace (2 pi)^+1: they cancel */
  double lp = f - 0.5 * log(v * d->rsd * d->rsd * r->det);
  if (!(tf_finite4(lp, a, b, xv) && vb > 0 && vb - vb == 0))
    return NAN;
  fit->a = a;
  fit->b = b;
  fit->bvar = vb;
  fit->xm = a + b * L;
  fit->xv = xv > 1e-30 ? xv : 1e-30;
  fit->next = e + 1;
  fit->haa = r->haa;
  fit->hab = r->hab;
  fit->hbb = r->hbb;
  fit->p3 = r->p3;
  fit->a0 = x->a0;
  fit->ea0 = x->ea0;
  return lp;
}

/* The rest of tf_seg_kink after its first evaluation r at (a, b), when
 * Newton did not converge there at once (kept out of line: about 4% of
 * the candidates). */
static double kl_rest(const tf_cpdata *d, size_t s, size_t e, double m,
                      double v, kl_fit *fit, kl_ctx x, double a, double b,
                      kl_eval r) {
  double c = x.c, Y = x.Y, L = x.L;
  kl_eval rn;
  if (r.f == -INFINITY) {
    a = m;
    b = d->rmean;
    kl_eval_at(&x, a, b, &r);
  }
  double f = r.f;
  /* Newton from the warm start; should it fail or stall away from the
   * mode (a prior level far from the data's, after counts of very
   * different sizes), once more from the level of the data with the
   * closed-form sums, and the better of the two kept */
  int retry = 0, conv = 0;
  double idet_r = NAN; /* 1 / r.det, once known for the final r */
  kl_eval r1 = r;
  double a1 = NAN, b1 = NAN, f1 = -INFINITY;
newton:
  if (f == -INFINITY)
    goto failed;
  for (int it = 0; it < 100; it++) {
    double idet = 1 / r.det;
    double da = (r.hbb * r.ga - r.hab * r.gb) * idet;
    double db = (r.haa * r.gb - r.hab * r.ga) * idet;
    if (!isfinite(da) || !isfinite(db))
      goto failed;
    /* Newton decrement: f rises by about lambda2 / 2 to the mode */
    double lambda2 = r.ga * da + r.gb * db;
    if (lambda2 < 1e-6) {
      /* converged: take the quadratic model's step and maximum (error
       * O(lambda^3) in f, below 1e-9, with the Hessian of the last
       * point) */
      f += 0.5 * lambda2;
      a += da;
      b += db;
      conv = 1;
      idet_r = idet;
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
      kl_eval_at(&x, a + t * da, b + t * db, &rn);
      if (rn.f >= f - 1e-12 * fabs(f) || h >= 50)
        break;
      t *= 0.5;
      h++;
    }
    if (!(rn.f >= f - 1e-12 * fabs(f)))
      break; /* no ascent left */
    a += t * da;
    b += t * db;
    r = rn;
    f = rn.f;
  }
  if (!conv && !retry) {
    r1 = r;
    a1 = a;
    b1 = b;
    f1 = f;
    goto again;
  }
  if (!conv && f1 > f) {
    r = r1;
    a = a1;
    b = b1;
    f = f1;
  }
result: {
    double idet = isnan(idet_r) ? 1 / r.det : idet_r;
    double lp = kl_finish(d, e, v, L, fit, &x, a, b, f, &r, idet);
    if (!isnan(lp))
      return lp;
    if (!retry)
      goto again;
  }
failed:
  if (retry) {
    if (f1 == -INFINITY)
      goto fallback;
    r = r1; /* the stalled first pass, once */
    a = a1;
    b = b1;
    f = f1;
    f1 = -INFINITY;
    goto result;
  }
again:
  retry = 1;
  idet_r = NAN;
  {
    double lE0;
    tf_esums(d, s, e, c, d->rmean, &lE0, NULL, NULL);
    b = d->rmean;
    a = isfinite(lE0) ? log(Y + 0.5) - lE0 : m;
    x.ks = NULL;
    kl_eval_at(&x, a, b, &r);
    f = r.f;
    conv = 0;
    goto newton;
  }
fallback:
  /* no usable mode (counts and priors far apart beyond double range): the
   * segment is taken as impossible, and the next warm start begins from
   * the prior */
  fit->a = m;
  fit->b = d->rmean;
  fit->pa = fit->pb = NAN;
  fit->next = 0;
  fit->bvar = d->rsd * d->rsd;
  fit->xm = m + d->rmean * L;
  fit->xv = v + L * L * d->rsd * d->rsd;
  return -INFINITY;
}

/* tf_seg_kink in parts, so that the forward pass can take each part for a
 * run of starts in turn (independent work side by side, where one start
 * at a time is a chain of dependent steps): kl_begin sets the context *xp,
 * extends the power sums to e and makes the warm start (*ap, *bp);
 * kl_eval_at evaluates there; kl_end finishes from that evaluation.  One
 * start's parts in a row are tf_seg_kink. */
static inline void kl_begin(const tf_cpdata *d, size_t s, size_t e, double m,
                            double v, kl_fit *fit, kl_ctx *xp, double *ap,
                            double *bp) {
  double c = (double)s - 1;
  double Y = tf_sumy(d, s, e), S1 = tf_sumty(d, s, e) - c * Y;
  double L = (double)(e - s + 1);
  double a = isfinite(fit->a) ? fit->a : m;
  double b = isfinite(fit->b) ? fit->b : d->rmean;
  if (!(fit->kv == v)) {
    /* the start's constant (the same for every end) */
    fit->kv = v;
    fit->iv = 1 / v;
  }
  double iphi = d->iphi;
  kl_ctx *x = xp;
  *x = (kl_ctx){d, s, e, c, Y, S1, m, v, L, iphi, fit->iv, d->irsd2, NULL,
                fit->a0, fit->ea0};
  if (!(x->ea0 > 0)) {
    x->a0 = a;
    x->ea0 = exp(a);
  }
  if (e - s < KL_KS_MAXLEN) {
    tf_ksums *ks = &fit->ks;
    if (ks->live && ks->e <= e && ks->e + 1 >= s)
      ks_extend(d, ks, s, e);
    else if (fabs(b) * L <= KL_BREF_RANGE)
      ks_build(d, ks, s, e, b);
    else
      ks->live = 0;
    if (ks->live)
      x->ks = ks;
  }
  if (fit->next == e && e > s && tf_finite2(fit->a, fit->b)) {
    /* warm start: one Newton step from the mode of [s, e-1] for the new
     * day's term alone, with the Hessian kept from that fit (the gradient
     * of the rest is zero there to the tolerance below) */
    if (!tf_isnan(d->y[e])) {
      double ex = exp(a + b * L);
      double h = d->wcls[x->ks ? x->ks->cls : tf_cls(d, e)] * ex * iphi;
      double g = d->y[e] * iphi - h;
      double haa = fit->haa + h, hab = fit->hab + h * L,
             hbb = fit->hbb + h * L * L;
      double idet = 1 / (haa * hbb - hab * hab);
      double da = (hbb - hab * L) * g * idet, db = (haa * L - hab) * g * idet;
      if (isfinite(fit->p3)) {
        /* and the second-order part: the gradient that step leaves,
         * -D3P[d, d] / 2 from the third derivatives of P = e^a E0 / phi
         * (P, P m1, P m2, P m3, the day's terms included), taken out by
         * the same Hessian */
        double L2 = L * L, P0 = fit->haa - x->iv + h, P1 = hab,
               P2 = hbb - x->irsd2, P3 = fit->p3 + h * L2 * L;
        double ra = -0.5 * (P0 * da * da + 2 * P1 * da * db + P2 * db * db);
        double rb = -0.5 * (P1 * da * da + 2 * P2 * da * db + P3 * db * db);
        da += (hbb * ra - hab * rb) * idet;
        db += (haa * rb - hab * ra) * idet;
      }
      if (fabs(da) < 1 && fabs(db) < 0.1) {
        a += da;
        b += db;
      }
    }
  } else if (isfinite(fit->pa) && isfinite(fit->a) && isfinite(fit->b) &&
             fabs(fit->a - fit->pa) < 1 && fabs(fit->b - fit->pb) < 0.1) {
    /* warm start: the modes of [s, e-2] and [s, e-1] extrapolated (not
     * after a large move) */
    a += fit->a - fit->pa;
    b += fit->b - fit->pb;
  }
  fit->pa = fit->a;
  fit->pb = fit->b;
  *ap = a;
  *bp = b;
}

static inline double kl_end(const tf_cpdata *d, size_t s, size_t e,
                            double m, double v, kl_fit *fit, kl_ctx *xp,
                            double a, double b, const kl_eval *rp) {
  kl_eval r = *rp;
  double L = xp->L;
  if (r.f != -INFINITY) {
    /* the common case: the first Newton step from the warm start is
     * already below the tolerance (as in kl_rest's first pass) */
    double idet = 1 / r.det;
    double da = (r.hbb * r.ga - r.hab * r.gb) * idet;
    double db = (r.haa * r.gb - r.hab * r.ga) * idet;
    if (tf_finite2(da, db)) {
      double lambda2 = r.ga * da + r.gb * db;
      if (lambda2 < 1e-6) {
        double lp = kl_finish(d, e, v, L, fit, xp, a + da, b + db,
                              r.f + 0.5 * lambda2, &r, idet);
        if (!isnan(lp))
          return lp;
      }
    }
  }
  return kl_rest(d, s, e, m, v, fit, *xp, a, b, r);
}

double tf_seg_kink(const tf_cpdata *d, size_t s, size_t e, double m,
                   double v, kl_fit *fit) {
  kl_ctx x;
  kl_eval r;
  double a, b;
  kl_begin(d, s, e, m, v, fit, &x, &a, &b);
  kl_eval_at(&x, a, b, &r);
  return kl_end(d, s, e, m, v, fit, &x, a, b, &r);
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
  double *sv, *wx, *wv; /* per active start: log filtered weight, x mean, var */
  double *qs, *qg;   /* per active start: e^{sv - max sv}, times the hazard */
  double *hz, *hz0;  /* hazard g(L) / S(L-1), L = 0..n (later, first segment) */
  double *tmp;       /* n, for the backward sums                 */
  double *cw;        /* direct cache only: W(s, e) per entry (below);
                      * ch->pool[3], not freed here */
  int direct;        /* the cache written in place (see tf_kinkl_run) */
  double lz;         /* log evidence from the last day's filtered weights */
} kl_work;

static void kl_work_free(kl_work *w) {
  free(w->mm);
  free(w->mv);
  free(w->act);
  free(w->run);
  free(w->fit);
  free(w->sv);
  free(w->wx);
  free(w->wv);
  free(w->qs);
  free(w->qg);
  free(w->hz);
  free(w->hz0);
  free(w->tmp);
}

/* The forward pass: messages, Fa, the e-major cache and stop[].
 *
 * For each end e the filtered weights sv(s) = Fa[s] + log P(s, e) + log
 * S(L-1) are exponentiated once against their largest, e^{sv - max}; the
 * new-segment weights Fa[s] + log P(s, e) + log g(L) are these times the
 * hazard g(L)/S(L-1) (tabled), so the sum for Fa[e+1], the total for the
 * pruning bound and the mixture weights of the message take one exp per
 * candidate and one log per day.  Should the new-segment weights all
 * underflow against the largest filtered weight, they are taken against
 * their own largest instead (one more exp per candidate, rare).
 *
 * With the direct cache the pass also keeps, per candidate, the weight
 * the results need, W(s, e) = Pr(segment [s, e] | a segment ends at e) =
 * (new-segment weight) / (their sum) for e < n-1, and for the last day
 * Pr(the segment covering day n-1 started at s | y) = (filtered weight) /
 * (their sum): the same ratios tf_cp_results would otherwise take one exp
 * each for (exp(Fa[s] + log P + log g - Fa[e+1])), here already in hand. */
static int kl_forward(twofold_changes *ch, kl_work *w, kl_entries *E) {
  const tf_cpdata *d = &ch->d;
  const tf_lenprior *lp = &ch->lp;
  size_t n = ch->n, na = 0;
  double eps = ch->opt.prune > 0 ? ch->opt.prune : 0;
  kl_ctx cx[KL_CHUNK];
  kl_eval cr[KL_CHUNK];
  double ca[KL_CHUNK], cb[KL_CHUNK], clp[KL_CHUNK];
  for (size_t i = 0; i <= n; i++)
    ch->Fa[i] = -INFINITY;
  ch->Fa[0] = 0;
  w->hz[0] = w->hz0[0] = 0;
  for (size_t L = 1; L <= n; L++) {
    w->hz[L] = lp->lS[L - 1] > -INFINITY ? exp(lp->lg[L] - lp->lS[L - 1]) : 0;
    w->hz0[L] =
        lp->lS0[L - 1] > -INFINITY ? exp(lp->lg0[L] - lp->lS0[L - 1]) : 0;
  }
  /* knot 0: log lambda with lambda ~ Gamma(alpha, beta), as a normal */
  w->mm[0] = gsl_sf_psi(d->alpha) - log(d->beta);
  w->mv[0] = gsl_sf_psi_1(d->alpha);
  for (size_t e = 0; e < n; e++) {
    if (ch->Fa[e] > -INFINITY) {
      w->act[na] = e;
      w->run[e] = 0;
      w->fit[e] = (kl_fit){.a = w->mm[e], .b = d->rmean, .pa = NAN,
                           .pb = NAN};
      na++;
    }
    double ref = -INFINITY;
    for (size_t i = 0; i < na; i++) {
      if (i % KL_CHUNK == 0) {
        /* the next chunk's fits, each part for every start of the chunk
         * in turn (tf_seg_kink, start by start, to the bit) */
        size_t nc = na - i < KL_CHUNK ? na - i : KL_CHUNK;
        for (size_t j = 0; j < nc; j++) {
          size_t s = w->act[i + j];
          kl_begin(d, s, e, w->mm[s], w->mv[s], &w->fit[s], &cx[j], &ca[j],
                   &cb[j]);
        }
        for (size_t j = 0; j < nc; j++)
          kl_eval_at(&cx[j], ca[j], cb[j], &cr[j]);
        for (size_t j = 0; j < nc; j++) {
          size_t s = w->act[i + j];
          clp[j] = kl_end(d, s, e, w->mm[s], w->mv[s], &w->fit[s], &cx[j],
                          ca[j], cb[j], &cr[j]);
        }
      }
      size_t s = w->act[i], L = e - s + 1;
      kl_fit *f = &w->fit[s];
      double lps = clp[i % KL_CHUNK];
      if (w->direct) {
        size_t k = ch->off[s] + (e - s);
        ch->clogP[k] = lps;
        ch->cb[k] = f->b;
        ch->cv[k] = f->bvar;
      } else {
        int rc = kl_push(E, s, lps, f->b, f->bvar, ch->msg);
        if (rc)
          return rc;
      }
      ch->stop[s] = e;
      w->wx[i] = f->xm;
      w->wv[i] = f->xv;
      /* filtered weight of "the segment covering day e started at s" */
      double sv = ch->Fa[s] + lps + tf_lsurv(lp, s, L);
      w->sv[i] = sv;
      if (sv > ref)
        ref = sv;
    }
    if (ref == -INFINITY) {
      if (w->cw)
        for (size_t i = 0; i < na; i++)
          w->cw[ch->off[w->act[i]] + (e - w->act[i])] = 0;
      continue; /* nothing possible ends here: Fa[e+1] stays -inf */
    }
    double tot = 0, sumg = 0;
    for (size_t i = 0; i < na; i++) {
      size_t s = w->act[i], L = e - s + 1;
      double q = exp(w->sv[i] - ref);
      double g = q * (s == 0 ? w->hz0[L] : w->hz[L]);
      w->qs[i] = q;
      w->qg[i] = g;
      tot += q;
      sumg += g;
    }
    if (e + 1 == n)
      w->lz = ref + log(tot);
    double F = -INFINITY;
    if (e + 1 < n) {
      if (sumg >= 1e-250) {
        F = ref + log(sumg);
      } else {
        double rg = -INFINITY;
        for (size_t i = 0; i < na; i++) {
          size_t s = w->act[i], L = e - s + 1;
          double l = w->sv[i] - tf_lsurv(lp, s, L) + tf_lg(lp, s, L);
          w->qg[i] = l;
          if (l > rg)
            rg = l;
        }
        sumg = 0;
        if (rg > -INFINITY) {
          for (size_t i = 0; i < na; i++) {
            double g = exp(w->qg[i] - rg);
            w->qg[i] = g;
            sumg += g;
          }
          F = rg + log(sumg);
        }
      }
      ch->Fa[e + 1] = F;
    }
    if (w->cw) {
      const double *src = e + 1 < n ? w->qg : w->qs;
      double inv = e + 1 < n ? (F > -INFINITY ? 1 / sumg : 0) : 1 / tot;
      for (size_t i = 0; i < na; i++)
        w->cw[ch->off[w->act[i]] + (e - w->act[i])] = src[i] * inv;
    }
    /* the message at knot e+1: the mixture over s, collapsed */
    if (e + 1 < n && F > -INFINITY) {
      double s0 = 0, s1 = 0, s2 = 0, xref = NAN;
      for (size_t i = 0; i < na; i++) {
        double om = w->qg[i];
        if (!(om > 0) || !isfinite(w->wx[i]) || !isfinite(w->wv[i]))
          continue;
        if (isnan(xref))
          xref = w->wx[i];
        double dx = w->wx[i] - xref;
        s0 += om;
        s1 += om * dx;
        s2 += om * (w->wv[i] + dx * dx);
      }
      double mu = s1 / s0;
      double var = s2 / s0 - mu * mu;
      w->mm[e + 1] = s0 > 0 ? xref + mu : w->mm[0];
      w->mv[e + 1] = s0 > 0 ? (var > 1e-30 ? var : 1e-30) : w->mv[0];
    }
    /* pruning */
    if (e + 1 < n && eps > 0) {
      double bound = eps * tot;
      size_t k = 0;
      /* without branches on the weights (which the processor cannot
       * predict): the run grows or restarts, the start is kept or not */
      size_t ms = (size_t)ch->opt.min_seg;
      for (size_t i = 0; i < na; i++) {
        size_t s = w->act[i], L = e - s + 1;
        size_t below = (size_t)((L >= ms) & (w->qs[i] < bound));
        size_t r = (w->run[s] + 1) * below;
        w->run[s] = r;
        w->act[k] = s;
        k += r < KL_PRUNE_RUN; /* else dropped */
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
  w.sv = malloc(n * sizeof(double));
  w.wx = malloc(n * sizeof(double));
  w.wv = malloc(n * sizeof(double));
  w.qs = malloc(n * sizeof(double));
  w.qg = malloc(n * sizeof(double));
  w.hz = malloc((n + 1) * sizeof(double));
  w.hz0 = malloc((n + 1) * sizeof(double));
  w.tmp = malloc(n * sizeof(double));
  size_t *cnt = NULL;
  if (!ch->Q || !ch->Fa || !ch->stop || !ch->off || !w.mm || !w.mv ||
      !w.act || !w.run || !w.fit || !w.sv || !w.wx || !w.wv || !w.qs ||
      !w.qg || !w.hz || !w.hz0 || !w.tmp)
    goto out;
  for (size_t s = 0; s < n; s++)
    ch->stop[s] = SIZE_MAX; /* never started */
  /* the segment cache in per-start order: start s holds e = s..stop[s].
   * For series up to KL_DIRECT_DAYS the forward pass writes it in place,
   * each start given room for every end (only the entries written are
   * ever touched, so the memory used is that of the candidates); longer
   * series collect e-major entries and reorder them after the pass. */
  if (n <= KL_DIRECT_DAYS) {
    size_t total = n * (n + 1) / 2;
    if (ch->poolcap < total) {
      for (int i = 0; i < 4; i++) {
        free(ch->pool[i]);
        ch->pool[i] = NULL;
      }
      ch->poolcap = 0;
      for (int i = 0; i < 4; i++)
        if (!(ch->pool[i] = malloc(total * sizeof(double))))
          goto out;
      ch->poolcap = total;
    }
    ch->clogP = ch->pool[0];
    ch->cb = ch->pool[1];
    ch->cv = ch->pool[2];
    w.cw = ch->pool[3];
    ch->cache_pooled = 1;
    ch->ncache = ch->capcache = total;
    for (size_t s = 0; s < n; s++)
      ch->off[s] = s * n - (s * (s - 1)) / 2; /* sum of n - j, j < s */
    w.direct = 1;
  }
  w.lz = -INFINITY;
  rc = kl_forward(ch, &w, &E);
  if (rc)
    goto out;
  rc = TWOFOLD_ENOMEM;
  if (w.direct) {
    /* a start that never became a candidate holds one impossible entry */
    for (size_t s = 0; s < n; s++) {
      if (ch->stop[s] != SIZE_MAX)
        continue;
      ch->stop[s] = s;
      ch->clogP[ch->off[s]] = -INFINITY;
      ch->cb[ch->off[s]] = 0;
      ch->cv[ch->off[s]] = 0;
      w.cw[ch->off[s]] = 0;
    }
  } else {
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
  }
  ch->Q[n] = 0;
  if (w.direct) {
    /* backward in probabilities, with the weights W(s, e) the forward pass
     * kept: P(change on day s | y) = sum_e W(s, e) P(a segment ends at e |
     * y), the latter P(change on day e+1 | y), or 1 for the last day (the
     * smoothing identity of forward filtering; Fearnhead 2006, section 3).
     * Q[t] = log P(change on day t | y) + log p(y) - Fa[t] then holds the
     * backward sums of METHODS A2 without one exp per candidate. */
    double *pr = w.tmp;
    for (size_t t = n; t-- > 1;) {
      const double *wt = w.cw + ch->off[t];
      size_t ne = ch->stop[t] - t + 1;
      double acc = 0;
      for (size_t j = 0; j < ne; j++) {
        size_t e = t + j;
        acc += wt[j] * (e + 1 < n ? pr[e + 1] : 1.0);
      }
      pr[t] = acc;
    }
    ch->Q[0] = w.lz;
    for (size_t t = 1; t < n; t++)
      ch->Q[t] = ch->Fa[t] > -INFINITY && pr[t] > 0
                     ? log(pr[t]) + w.lz - ch->Fa[t]
                     : -INFINITY;
  } else {
    /* backward over the cache (METHODS A2): the terms against their
     * largest, one exp each */
    for (size_t t = n; t-- > 0;) {
      double *tm = w.tmp;
      const double *cl = ch->clogP + ch->off[t];
      size_t ne = ch->stop[t] - t + 1;
      for (size_t j = 0; j < ne; j++) {
        size_t e = t + j, L = j + 1;
        double l = cl[j];
        if (l > -INFINITY)
          l += (e + 1 < n ? tf_lg(&ch->lp, t, L) : tf_lsurv(&ch->lp, t, L)) +
               ch->Q[e + 1];
        tm[j] = l;
      }
      ch->Q[t] = tf_lse_array(tm, ne);
    }
  }
  if (!(ch->Q[0] > -INFINITY)) {
    rc = tf_msg_set(ch->msg, TWOFOLD_ENOCONV,
                    "no segmentation of the %zu days has a finite "
                    "likelihood",
                    n);
    goto out;
  }
  rc = tf_cp_results(ch, w.cw, NULL);
  w.cw = NULL;
  if (rc)
    goto out;
  /* levels of the most probable segments: the count at the middle day
   * from the segment's own fit */
  for (size_t j = 0; j <= ch->nmap; j++) {
    size_t s = ch->mapstart[j], e = ch->mapstart[j + 1] - 1;
    size_t mid = (s + e) / 2;
    kl_fit f = {.a = NAN, .b = NAN, .pa = NAN, .pb = NAN};
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
