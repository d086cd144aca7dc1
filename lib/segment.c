/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Segment computations for the changepoint module: the once-per-series
 * estimates of weekday effects and dispersion, prefix sums, closed-form
 * geometric sums per weekday class, segment marginal likelihoods, the
 * segment-length prior and a seeded generator.
 *
 * Segment marginals (METHODS B1-B5): on [s, e] with u = t - c,
 * log mu_t = log lambda + b u + delta_{weekday(t)}; the Poisson
 * log-likelihood of each day is divided by phi (a tempered or power
 * likelihood: Holmes & Walker 2017, Biometrika 104:497-503; Grunwald & van
 * Ommen 2017, Bayesian Analysis 12:1069-1103), which inflates posterior
 * variances about phi-fold as quasi-likelihood standard errors do (Wedderburn
 * 1974, Biometrika 61:439-447).  lambda ~ Gamma(alpha, beta) is integrated
 * out exactly; b ~ N(mean, sd^2) by a one-dimensional Laplace
 * approximation (Tierney & Kadane 1986, JASA 81:82-86).
 *
 * Incremental power sums (tf_psum, cp.h): for a fixed segment start the
 * sums sum w_t u^k e^{bref u}, k < TF_PSUM_N, grow by one day in O(k)
 * flops, and give E_j(b) for b near bref by a Taylor shift with a bounded
 * remainder; tf_seg_jump_ps solves the JUMP marginal's mode with them
 * (Halley steps, the cubic model at the last one, each fit started from
 * the last evaluation of the segment a day shorter), with no exponential
 * per day, one per evaluation and one per warm start.  The step-halving
 * solver tf_seg_jump on the closed-form class sums stays as the general
 * method and the fallback.
 */
#include "cp.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* ---- generator ------------------------------------------------------- */

static uint64_t splitmix64(uint64_t *x) {
  uint64_t z = (*x += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

void tf_rng_seed(tf_rng *r, uint64_t seed) {
  uint64_t x = seed;
  for (int i = 0; i < 4; i++)
    r->s[i] = splitmix64(&x);
}

static uint64_t rotl(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }

static uint64_t rng_next(tf_rng *r) {
  uint64_t *s = r->s;
  uint64_t res = rotl(s[1] * 5, 7) * 9;
  uint64_t t = s[1] << 17;
  s[2] ^= s[0];
  s[3] ^= s[1];
  s[1] ^= s[2];
  s[0] ^= s[3];
  s[2] ^= t;
  s[3] = rotl(s[3], 45);
  return res;
}

double tf_rng_unif(tf_rng *r) {
  return ((double)(rng_next(r) >> 11) + 0.5) * (1.0 / 9007199254740992.0);
}

double tf_rng_norm(tf_rng *r) {
  double u = tf_rng_unif(r), v = tf_rng_unif(r);
  return sqrt(-2.0 * log(u)) * cos(6.283185307179586 * v);
}

/* ---- validation -------------------------------------------------------- */

int tf_cp_check_counts(const double *y, size_t n, char *msg) {
  for (size_t i = 0; i < n; i++)
    if (!tf_count_ok(y[i]))
      return tf_msg_set(msg, TWOFOLD_ECOUNT,
                        "day %zu: count %g is not a whole number in "
                        "[0, 2^53] or NaN",
                        i, y[i]);
  return 0;
}

/* ---- geometric sums (METHODS B2) -------------------------------------- */

/* For m = 0..L-1 with weights e^{B m}: log of their sum, and the mean and
 * variance of m. */
static void geo(double B, size_t L, double *logG, double *M, double *V) {
  double Ld = (double)L;
  if (L == 1) {
    *logG = 0;
    *M = 0;
    *V = 0;
    return;
  }
  double BL = B * Ld;
  if (fabs(BL) < 0.05) {
    double L2 = Ld * Ld, L4 = L2 * L2, L6 = L4 * L2, B2 = B * B;
    *M = (Ld - 1) / 2 + B * (L2 - 1) / 12 - B * B2 * (L4 - 1) / 720 +
         B * B2 * B2 * (L6 - 1) / 30240;
    *V = (L2 - 1) / 12 - B2 * (L4 - 1) / 240 + B2 * B2 * (L6 - 1) / 6048;
    /* log G = log L + B (L-1)/2 + B^2 (L^2-1)/24 - B^4 (L^4-1)/2880 */
    *logG = log(Ld) + B * (Ld - 1) / 2 + B2 * (L2 - 1) / 24 -
            B2 * B2 * (L4 - 1) / 2880;
    return;
  }
  if (B > 0)
    *logG = B * (Ld - 1) + log(-expm1(-BL)) - log(-expm1(-B));
  else
    *logG = log(-expm1(BL)) - log(-expm1(B));
  *M = Ld / (-expm1(-BL)) - 1 / (-expm1(-B));
  double sh = sinh(B / 2), shL = sinh(BL / 2);
  double v = 1 / (4 * sh * sh);
  if (isfinite(shL))
    v -= Ld * Ld / (4 * shL * shL);
  *V = v > 0 ? v : 0;
}

/* geo() in linear space from Eb = expm1(B) and EL = expm1(B L) (B != 0,
 * |B L| >= 0.05, no overflow): G = EL/Eb; with 1/(-expm1(-y)) = (1 + E)/E
 * for E = expm1(y), and 1/(4 sinh^2(y/2)) = (1 + E)/E^2. */
static void geo_from(double Eb, double EL, size_t L, double *G, double *M,
                     double *V) {
  double Ld = (double)L, iEb = 1 / Eb, iEL = 1 / EL;
  double ab = (1 + Eb) * iEb, al = Ld * (1 + EL) * iEL;
  *G = EL * iEb;
  *M = al - ab;
  double v = ab * iEb - al * Ld * iEL;
  *V = v > 0 ? v : 0;
}

/* geo() in linear space for lengths q and q + 1 (q >= 0; G = M = V = 0
 * for length 0): one expm1 for both, since
 * expm1(B (q+1)) = expm1(B q) e^B + expm1(B), a sum of two terms of the
 * same sign (no cancellation).  Eb = expm1(B). */
static void geo_pair(double B, double Eb, size_t q, double *G, double *M,
                     double *V) {
  G[0] = M[0] = V[0] = 0;
  if (B == 0) {
    for (int k = 0; k < 2; k++) {
      double Ld = (double)(q + (size_t)k);
      G[k] = Ld;
      M[k] = Ld > 0 ? (Ld - 1) / 2 : 0;
      V[k] = Ld > 0 ? (Ld * Ld - 1) / 12 : 0;
    }
    return;
  }
  double Eq = 0;
  int haveq = 0;
  for (int k = 0; k < 2; k++) {
    size_t L = q + (size_t)k;
    if (L == 0)
      continue;
    if (L == 1) {
      G[k] = 1;
      M[k] = 0;
      V[k] = 0;
      Eq = Eb;
      haveq = 1;
      continue;
    }
    double BL = B * (double)L;
    if (fabs(BL) < 0.05) {
      double lG;
      geo(B, L, &lG, &M[k], &V[k]);
      G[k] = exp(lG);
      haveq = 0;
      continue;
    }
    double EL = haveq ? Eq * (1 + Eb) + Eb : expm1(BL);
    Eq = EL;
    haveq = 1;
    geo_from(Eb, EL, L, &G[k], &M[k], &V[k]);
  }
}

/* The class sums of METHODS B3 in linear space when nothing can overflow
 * and the missing days (subtracted explicitly) are few: E0 itself and
 * E1/E0, E2/E0.  The e^{b u} of the first 7 days are powers of e^b and
 * both class lengths share one expm1, so an evaluation costs 3
 * exponentials plus one per missing day.  Returns 0 when it does not
 * apply (the caller then takes the log-space forms). */
static int esums_lin(const tf_cpdata *d, size_t s, size_t e, double c,
                     double b, double *E0o, double *m1, double *m2) {
  size_t L = e - s + 1;
  size_t nm = d->cmiss[e + 1] - d->cmiss[s];
  if (nm * 4 >= L && nm > 0)
    return 0;
  if (!(fabs(b) * ((double)L + fabs((double)s - c)) < 600))
    return 0;
  size_t q = L / 7, r = L % 7;
  double B = 7 * b;
  double xb = expm1(b), zb = 1 + xb, Eb;
  if (fabs(xb) < 0.1) /* (1 + x)^7 - 1 by Horner: little cancellation */
    Eb = xb * (7 + xb * (21 + xb * (35 + xb * (35 + xb * (21 + xb * (7 + xb))))));
  else
    Eb = expm1(B);
  double G[2], M[2], V[2];
  geo_pair(B, Eb, q, G, M, V);
  double zp = exp(b * ((double)s - c));
  double E0 = 0, E1 = 0, E2 = 0;
  int cl = tf_cls(d, s);
  for (size_t j = 0; j < 7 && j < L; j++) {
    int k = j < r ? 1 : 0;
    double u0 = (double)(s + j) - c;
    double w = d->wcls[cl] * zp * G[k];
    double mj = u0 + 7 * M[k];
    E0 += w;
    E1 += w * mj;
    E2 += w * (mj * mj + 49 * V[k]);
    zp *= zb;
    cl = cl == 6 ? 0 : cl + 1;
  }
  if (nm > 0) {
    double E0all = E0;
    size_t i0 = d->cmiss[s];
    for (size_t i = i0; i < i0 + nm; i++) {
      size_t t = d->miss[i];
      double u = (double)t - c;
      double w = d->wcls[tf_cls(d, t)] * exp(b * u);
      E0 -= w;
      E1 -= w * u;
      E2 -= w * u * u;
    }
    /* cancellation: keep at least 3 of the 16 digits */
    if (!(E0 > 1e-3 * E0all))
      return 0;
  }
  double i0 = 1 / E0;
  *E0o = E0;
  *m1 = E1 * i0;
  *m2 = E2 * i0;
  return 1;
}

void tf_esums(const tf_cpdata *d, size_t s, size_t e, double c, double b,
              double *logE0, double *m1, double *m2) {
  size_t L = e - s + 1;
  size_t nm = d->cmiss[e + 1] - d->cmiss[s];
  double lc[7], mu[7], sq[7];
  int nc = 0;
  double mx = -INFINITY;
  {
    double E0, M1, M2;
    if (esums_lin(d, s, e, c, b, &E0, &M1, &M2)) {
      *logE0 = log(E0);
      if (m1)
        *m1 = M1;
      if (m2)
        *m2 = M2;
      return;
    }
  }
  if (nm == 0 || nm * 4 < L) {
    size_t q = L / 7, r = L % 7;
    double lG[2] = {0, 0}, M[2] = {0, 0}, V[2] = {0, 0};
    if (q > 0)
      geo(7 * b, q, &lG[0], &M[0], &V[0]);
    geo(7 * b, q + 1, &lG[1], &M[1], &V[1]);
    for (size_t j = 0; j < 7 && j < L; j++) {
      int k = j < r ? 1 : 0;
      double u0 = (double)(s + j) - c;
      lc[nc] = d->delta[tf_cls(d, s + j)] + b * u0 + lG[k];
      mu[nc] = u0 + 7 * M[k];
      sq[nc] = mu[nc] * mu[nc] + 49 * V[k];
      if (lc[nc] > mx)
        mx = lc[nc];
      nc++;
    }
    double E0 = 0, E1 = 0, E2 = 0;
    for (int j = 0; j < nc; j++) {
      double w = exp(lc[j] - mx);
      E0 += w;
      E1 += w * mu[j];
      E2 += w * sq[j];
    }
    if (nm > 0) {
      /* subtract the missing days (METHODS B3) */
      size_t i0 = d->cmiss[s];
      for (size_t i = i0; i < i0 + nm; i++) {
        size_t t = d->miss[i];
        double u = (double)t - c;
        double w = exp(d->delta[tf_cls(d, t)] + b * u - mx);
        E0 -= w;
        E1 -= w * u;
        E2 -= w * u * u;
      }
      if (!(E0 > 1e-12 * (double)L))
        goto direct;
    }
    *logE0 = mx + log(E0);
    if (m1)
      *m1 = E1 / E0;
    if (m2)
      *m2 = E2 / E0;
    return;
  }
direct:
  /* many missing days: sum the present days directly */
  mx = -INFINITY;
  for (size_t t = s; t <= e; t++) {
    if (tf_isnan(d->y[t]))
      continue;
    double v = d->delta[tf_cls(d, t)] + b * ((double)t - c);
    if (v > mx)
      mx = v;
  }
  if (mx == -INFINITY) {
    *logE0 = -INFINITY;
    if (m1)
      *m1 = 0;
    if (m2)
      *m2 = 0;
    return;
  }
  double E0 = 0, E1 = 0, E2 = 0;
  for (size_t t = s; t <= e; t++) {
    if (tf_isnan(d->y[t]))
      continue;
    double u = (double)t - c;
    double w = exp(d->delta[tf_cls(d, t)] + b * u - mx);
    E0 += w;
    E1 += w * u;
    E2 += w * u * u;
  }
  *logE0 = mx + log(E0);
  if (m1)
    *m1 = E1 / E0;
  if (m2)
    *m2 = E2 / E0;
}

/* ---- incremental power sums (cp.h: tf_psum) --------------------------- */

/* The Taylor shift keeps the terms k = 0..n-1, n one of 12, 16 or 19 with
 * rho^n / n! e^{2 rho} < 2^-56, a bound on the remainder relative to E_j
 * (each omitted term is at most rho^k / k! A_j SCALE^j and
 * E_j >= e^{-rho} A_j SCALE^j); psum_rmax[n-1] is the largest rho for n
 * terms.  rho is capped at PSUM_RHO, where a series of alternating sign
 * loses at most a factor e^{2 rho} < 7.4 (3 bits) to cancellation. */
#define PSUM_RHO 1.0
static const double psum_rmax[TF_PSUM_N] = {
    1.387779e-17, 5.268356e-09, 4.366726e-06, 1.350839e-04, 1.106899e-03,
    4.633807e-03, 1.315366e-02, 2.919512e-02, 5.487567e-02, 9.167388e-02,
    1.404140e-01, 2.013630e-01, 2.743658e-01, 3.589766e-01, 4.545683e-01,
    5.604160e-01, 6.757565e-01, 7.998281e-01, 9.318959e-01, 1.071267e+00,
    1.217298e+00, 1.369397e+00};
/* the same for a remainder below 1e-6 (first steps, which only set the
 * direction) */
static const double psum_rmax_lo[TF_PSUM_N] = {
    9.999980e-07, 1.412218e-03, 1.795499e-02, 6.766432e-02, 1.545229e-01,
    2.733105e-01, 4.169113e-01, 5.791717e-01, 7.554063e-01, 9.421904e-01,
    1.137040e+00, 1.338145e+00, 1.544169e+00, 1.754113e+00, 1.967220e+00,
    2.182909e+00, 2.400726e+00, 2.620315e+00, 2.841392e+00, 3.063728e+00,
    3.287137e+00, 3.511466e+00};
static void psum_clear(tf_psum *p, double bref) {
  p->next = p->s;
  p->np = 0;
  p->umax = 0;
  p->bref = bref;
  /* e^{bref} = g0 e^{bref - log g0} = g0 (1 + (bref - log g0)) */
  p->g0 = exp(bref);
  p->g1 = p->g0 * (bref - log(p->g0));
  p->z = 1;
  p->bad = !(isfinite(p->g0) && p->g0 > 0 && isfinite(p->g1));
  for (int k = 0; k < TF_PSUM_N; k++)
    p->A[k] = 0;
}

void tf_psum_init(tf_psum *p, size_t s, double bref) {
  p->s = s;
  p->wok = 0;
  p->wend = 0;
  p->wb = 0;
  for (int j = 0; j < 4; j++)
    p->wE[j] = 0;
  psum_clear(p, bref);
}

void tf_psum_extend(tf_psum *p, const tf_cpdata *d, size_t e) {
  if (e < p->next)
    return;
  const double iS = 1 / TF_PSUM_SCALE;
  double z = p->z, g0 = p->g0, g1 = p->g1;
  int cl = tf_cls(d, p->next);
  for (size_t t = p->next; t <= e; t++) {
    size_t u = t - p->s;
    if ((u & 31) == 0) /* refresh: the running product drifts ~1 ulp a day */
      z = exp(p->bref * (double)u);
    if (!tf_isnan(d->y[t])) {
      tf_pow_add(p->A, TF_PSUM_N, d->wcls[cl] * z, (double)u * iS);
      p->np++;
      p->umax = (double)u;
    }
    z = z * g0 + z * g1;
    cl = cl == 6 ? 0 : cl + 1;
  }
  p->z = z;
  p->next = e + 1;
  if (!(p->A[0] <= DBL_MAX && p->A[TF_PSUM_N - 1] <= DBL_MAX))
    p->bad = 1;
}

void tf_psum_reanchor(tf_psum *p, const tf_cpdata *d, double bref) {
  size_t next = p->next;
  psum_clear(p, bref);
  if (next > p->s && !p->bad)
    tf_psum_extend(p, d, next - 1);
}

static int psum_eval(const tf_psum *p, double b, int nmom, double *E,
                     const double *rmax) {
  if (p->bad || nmom < 1 || nmom > TF_PSUM_NMOM)
    return -1;
  double del = b - p->bref, rho = fabs(del) * p->umax;
  if (!(rho <= PSUM_RHO))
    return 1; /* also for NaN */
  /* n terms with rho <= rmax[n - 1], n from 12, 16, 19 (20: too far):
   * more terms than the fewest, but the same count for most of the
   * evaluations, so that the processor predicts the series' loop (about
   * 8% less time for JUMP than the fewest terms) */
  int n = rmax[11] >= rho ? 12 : rmax[15] >= rho ? 16 : rmax[18] >= rho ? 19 : 20;
  if (n > TF_PSUM_N - TF_PSUM_NMOM + 1)
    return 1;
  double acc[4];
  tf_pow_shift4(p->A, n, del * TF_PSUM_SCALE, acc);
  double sc = 1;
  for (int j = 0; j < nmom; j++) {
    E[j] = sc * acc[j];
    sc *= TF_PSUM_SCALE;
  }
  return 0;
}

int tf_psum_eval(const tf_psum *p, double b, int nmom, double *E) {
  return psum_eval(p, b, nmom, E, psum_rmax);
}

/* ---- segment marginals (METHODS B5) ----------------------------------- */

/* A segment without a day of data has marginal likelihood 1 (and the
 * prior level; NaN while the online filter has not yet scaled it). */
static inline int no_data(const tf_cpdata *d, size_t s, size_t e) {
  return d->cmiss[e + 1] - d->cmiss[s] == e - s + 1;
}

double tf_seg_level(const tf_cpdata *d, size_t s, size_t e, double *lvl) {
  if (no_data(d, s, e)) {
    if (lvl)
      *lvl = d->beta > 0 ? d->alpha / d->beta : NAN;
    return 0;
  }
  double Y = tf_sumy(d, s, e), W = d->cw[e + 1] - d->cw[s];
  double ap = d->alpha + Y / d->phi, bp = d->beta + W / d->phi;
  if (lvl)
    *lvl = ap / bp;
  return d->lvl0 + tf_lgamma(ap) - ap * log(bp);
}

/* f(b) of B5 without the b-free constants, and its derivatives. */
static double jump_f(const tf_cpdata *d, size_t s, size_t e, double c,
                     double Y, double S1, double b, double *f1, double *f2,
                     double *lbp) {
  double phi = d->phi, ap = d->alpha + Y / phi;
  double z = (b - d->rmean) / d->rsd;
  double E0, m1, m2, l, r, t;
  if (esums_lin(d, s, e, c, b, &E0, &m1, &m2)) {
    /* linear space: x = E0/phi, r = x / (beta + x) = 1 / (1 + rho) and
     * r^2 rho = r (1 - r) */
    double x = E0 / phi, bx = d->beta + x, ibx = 1 / bx;
    l = log(bx);
    r = x * ibx;
    double V = m2 - m1 * m1;
    if (V < 0)
      V = 0;
    t = r * (r * V + d->beta * ibx * m2);
  } else {
    double lE0;
    tf_esums(d, s, e, c, b, &lE0, &m1, &m2);
    double lb = d->lbeta, lx = lE0 - d->lphi;
    l = tf_lse(lb, lx);
    double rho = exp(lb - lx); /* beta phi / E0; inf when E0 = 0 */
    r = 1 / (1 + rho);
    double V = m2 - m1 * m1;
    if (V < 0)
      V = 0;
    t = isfinite(rho) ? r * r * (V + rho * m2) : 0;
  }
  double f = b * S1 / phi - ap * l - 0.5 * z * z;
  if (f1)
    *f1 = S1 / phi - ap * m1 * r - z / d->rsd;
  if (f2)
    *f2 = -ap * t - 1 / (d->rsd * d->rsd);
  if (lbp)
    *lbp = l;
  return f;
}

double tf_seg_jump(const tf_cpdata *d, size_t s, size_t e, double *bio,
                   double *bvar, double *lvl) {
  if (no_data(d, s, e)) {
    *bio = d->rmean;
    *bvar = d->rsd * d->rsd;
    if (lvl)
      *lvl = d->beta > 0 ? d->alpha / d->beta : NAN;
    return 0;
  }
  double c = 0.5 * ((double)s + (double)e);
  double Y = tf_sumy(d, s, e), S1 = tf_sumty(d, s, e) - c * Y;
  double b = isfinite(*bio) ? *bio : d->rmean;
  double f1, f2, lbp;
  double f = jump_f(d, s, e, c, Y, S1, b, &f1, &f2, &lbp);
  if (!isfinite(f) && b != d->rmean) {
    b = d->rmean;
    f = jump_f(d, s, e, c, Y, S1, b, &f1, &f2, &lbp);
  }
  if (!isfinite(f) || !(f2 < 0))
    goto impossible;
  for (int it = 0; it < 60; it++) {
    double step = -f1 / f2;
    if (!isfinite(step))
      goto impossible;
    if (fabs(step) > 1) /* a trust region: at most 1 a day per step */
      step = step > 0 ? 1 : -1;
    if (fabs(step) < 1e-9 * (1 + fabs(b))) {
      /* converged: the quadratic model puts the mode at b + step (error
       * O(L step^2)); f, f2 and the level are evaluated there (f2 at b
       * would be off by O(L step) relative) */
      double bn = b + step, f1n, f2n, lbn;
      double fn = jump_f(d, s, e, c, Y, S1, bn, &f1n, &f2n, &lbn);
      if (isfinite(fn) && f2n < 0 && fn >= f) {
        b = bn;
        f = fn;
        f2 = f2n;
        lbp = lbn;
      } else {
        b = bn;
        f += 0.5 * f1 * step;
      }
      break;
    }
    double bn = b + step, f1n, f2n, lbn;
    double fn = jump_f(d, s, e, c, Y, S1, bn, &f1n, &f2n, &lbn);
    int h = 0;
    while (!(fn >= f - 1e-12 * fabs(f)) && h < 40) {
      step *= 0.5;
      bn = b + step;
      fn = jump_f(d, s, e, c, Y, S1, bn, &f1n, &f2n, &lbn);
      h++;
    }
    if (!(fn >= f - 1e-12 * fabs(f)) || !(f2n < 0))
      break; /* no ascent left (or the sums left double range): stay */
    b = bn;
    f = fn;
    f1 = f1n;
    f2 = f2n;
    lbp = lbn;
    if (fabs(step) < 1e-10 * (1 + fabs(b)))
      break;
  }
  /* f was evaluated at the final b: a last Newton step would change it by
   * O(step^2), below double precision here. */
  {
    double ap = d->alpha + Y / d->phi;
    double lp = f + d->lvl0 + tf_lgamma(ap) - d->lrsd - 0.5 * log(-f2);
    /* the 1/sqrt(2 pi) of N(b) cancels the sqrt(2 pi) of the Laplace
     * step */
    if (isfinite(lp) && isfinite(b)) {
      *bio = b;
      *bvar = -1 / f2;
      if (lvl)
        *lvl = ap / exp(lbp);
      return lp;
    }
  }
impossible:
  /* no finite mode (counts beyond the range the sums can hold): the
   * segment is taken as impossible */
  *bio = d->rmean;
  *bvar = d->rsd * d->rsd;
  if (lvl)
    *lvl = NAN;
  return -INFINITY;
}

/* lgamma(x) - (x - 1/2) log x for x >= 10: -x + log sqrt(2 pi) + the
 * Stirling series to x^-11 (absolute error below 1e-14; Abramowitz &
 * Stegun 1964, 6.1.40-41). */
static double lgamma_rest(double x) {
  double ix = 1 / x, i2 = ix * ix;
  double ser =
      ix * (1.0 / 12 +
            i2 * (-1.0 / 360 +
                  i2 * (1.0 / 1260 +
                        i2 * (-1.0 / 1680 +
                              i2 * (1.0 / 1188 - i2 * 691.0 / 360360)))));
  return -x + 0.91893853320467274178 + ser;
}

/* tf_seg_jump by Halley steps on f(b) of B5 with the moments from the power
 * sums of p.  About the centre c = s + h of [s, e] (u = t - s about the
 * start):
 *   E0c = e^{-b h} E0,  m1 = E1/E0 - h,  V = E2/E0 - (E1/E0)^2,
 *   m2 = V + m1^2,  k3 = the third central moment (from E3);
 * with x = E0c/phi, r = x/(beta + x), q = 1 - r and ap = alpha + Y/phi:
 *   f'   = S1/phi - ap r m1 - (b - mean)/sd^2,
 *   f''  = -ap T - 1/sd^2,  T = r^2 V + r q m2,
 *   f''' = -ap dT/db,  dT/db = 2 r r1 V + r^2 k3 + r1 (q - r) m2
 *                              + r q (k3 + 2 m1 V),  r1 = dr/db = r q m1.
 * Start.  When p holds the last evaluation for [s, e-1] (E_0..E_3 at its
 * slope wb, p->wok), adding day e's term w_e u^j e^{wb u} to them gives
 * the sums of [s, e] at wb exactly, and the centre's half-day move is in
 * h (e^{-wb h} by one exp); one Halley step from wb with these exact
 * derivatives puts the first evaluation, with full sums, close enough
 * to the mode that about 94% of the candidates of bench-cp converge at
 * once (one evaluation each; a day moves the mode by 1e-2 / L to 1e-1 / L
 * for most of them there, so the cubic model alone from wb would not do).
 * Otherwise (the first end, after a fallback, a gap in the ends) the
 * first evaluation, from the caller's start, only sets the direction:
 * its sums are cut at a remainder of 1e-6.  Converged when the step s times
 * the span L is below 2e-5 and lam2 (s L)^2 < 1e-9, lam2 = f'^2/(-f'')
 * (the Newton decrement): the step is taken without another evaluation,
 * the maximum from the cubic model (error about f'''' s^4 / 24, with
 * f'''' about f'' L^2 / 10: below 1e-11) and the curvature moved to the
 * new point by f''' (relative error about (s L)^2 / 20 < 1e-10).  No step
 * halving: when |f'| fails to fall, or anything leaves range, tf_seg_jump
 * takes over from the same start.  For ap >= 10 the last terms are
 * gathered as ap log(ap / (beta + x)) - log sqrt(ap (-f'')) with the
 * Stirling series (two logarithms). */
/* f', f'' and f''' of tf_seg_jump_ps at b from E_0..E_3 about the start
 * and eh = e^{-b h}, with the Halley step; 0, or 1 when out of range.
 * Over common denominators with one division where the products stay in
 * range (E0^3 times about ap x^3 L^3 below DBL_MAX), else with the
 * normalized moments (two divisions in a row). */
typedef struct jps_der {
  double bx, ibx, r, m1, z, f1, f2, f3, sn, step;
} jps_der;

static inline int jps_derivs(const double *E, double eh, double b, double h,
                             double iphi, double beta, double ap, double S1p,
                             double rmean, double isd, double isd2,
                             jps_der *o) {
  double x = eh * E[0] * iphi, bx = beta + x;
  {
    /* the same over the common denominators, with one division: with
     * P = E0 (beta + x), W = V E0^2, M1 = m1 E0, M2 = m2 E0^2 and
     * K3 = k3 E0^3, f' = F1/P, f'' = -N2/P^2, f''' = -ap T1/P^3 */
    double E0 = E[0], E1 = E[1], E2 = E[2], E3 = E[3], P = E0 * bx;
    double W = E2 * E0 - E1 * E1;
    if (W < 0)
      W = 0;
    double M1 = E1 - h * E0, M2 = W + M1 * M1;
    double K3 = E0 * E0 * E3 - E1 * (3 * E2 * E0 - 2 * E1 * E1);
    double z = (b - rmean) * isd;
    double N2 = ap * x * (x * W + beta * M2) + isd2 * P * P;
    double F1 = (S1p - z * isd) * P - ap * x * M1;
    double bM1 = beta * M1;
    double T1 = x * (2 * x * bM1 * W + x * K3 * bx + bM1 * (beta - x) * M2 +
                     beta * bx * (K3 + 2 * M1 * W));
    double PN = P * N2;
    if (PN >= DBL_MIN && PN <= DBL_MAX && N2 > 0 && isfinite(T1) &&
        isfinite(F1)) {
      double iPN = 1 / PN, iP = N2 * iPN, iN2 = P * iPN;
      double sn = F1 * P * iN2, a = 0.5 * ap * T1 * sn * iPN;
      double iP2 = iP * iP;
      o->bx = bx;
      o->ibx = E0 * iP;
      o->r = x * E0 * iP;
      o->m1 = M1 * bx * iP;
      o->z = z;
      o->f1 = F1 * iP;
      o->f2 = -N2 * iP2;
      o->f3 = -ap * T1 * iP2 * iP;
      o->sn = sn;
      o->step = fabs(a) <= 0.25 ? sn * (1 - a + a * a) : sn;
      if (o->f2 < 0 && isfinite(sn))
        return 0;
    }
  }
  /* 1/E0 and 1/(beta + x) from one division */
  double D = E[0] * bx, iD = 1 / D, ie, ibx;
  if (D <= DBL_MAX && D >= DBL_MIN) {
    ie = bx * iD;
    ibx = E[0] * iD;
  } else {
    ie = 1 / E[0];
    ibx = 1 / bx;
  }
  double mt = E[1] * ie, m2t = E[2] * ie, m3t = E[3] * ie;
  double V = m2t - mt * mt;
  if (V < 0)
    V = 0;
  double k3 = m3t - mt * (3 * m2t - 2 * mt * mt);
  double m1 = mt - h, m2 = V + m1 * m1;
  double r = x * ibx, q = beta * ibx;
  double z = (b - rmean) * isd;
  double f1 = S1p - ap * r * m1 - z * isd;
  double T = r * (r * V + q * m2);
  double f2 = -ap * T - isd2;
  double if2 = 1 / f2, sn = -f1 * if2;
  if (!(f2 < 0) || !isfinite(sn) || !isfinite(bx))
    return 1;
  /* Halley: the root of the quadratic model of f' */
  double r1 = r * q * m1;
  double T1 = 2 * r * r1 * V + r * r * k3 + r1 * (q - r) * m2 +
              r * q * (k3 + 2 * m1 * V);
  double f3 = -ap * T1;
  /* step = sn / (1 + a), a = f3 sn / (2 f2), to O(a^3) as Halley is */
  double a = 0.5 * f3 * sn * if2, step = sn * (1 - a + a * a);
  if (!(fabs(a) <= 0.25))
    step = sn;
  o->bx = bx;
  o->ibx = ibx;
  o->r = r;
  o->m1 = m1;
  o->z = z;
  o->f1 = f1;
  o->f2 = f2;
  o->f3 = f3;
  o->sn = sn;
  o->step = step;
  return 0;
}

double tf_seg_jump_ps(const tf_cpdata *d, tf_psum *p, size_t e, double *bio,
                      double *bvar, double *lvl) {
  size_t s = p->s;
  if (no_data(d, s, e)) {
    p->wok = 0;
    return tf_seg_jump(d, s, e, bio, bvar, lvl);
  }
  tf_psum_extend(p, d, e);
  double h = 0.5 * (double)(e - s), c = (double)s + h;
  double Y = tf_sumy(d, s, e), S1 = tf_sumty(d, s, e) - c * Y;
  double iphi = 1 / d->phi, ap = d->alpha + Y * iphi, beta = d->beta;
  double isd = 1 / d->rsd, isd2 = isd * isd, S1p = S1 * iphi;
  double span = p->umax + 1;
  double b0 = isfinite(*bio) ? *bio : d->rmean, b = b0, af1p = INFINITY;
  double wg = NAN, wbg = NAN; /* e^{-wbg h}, exact, for e^{-b h} near it */
  int coarse = 1;
  if (p->wok && p->wend + 1 == e) {
    /* warm start from the last evaluation for [s, e-1]: its sums at wb
     * plus day e's term are those of [s, e] at wb, exactly, and the
     * centre moves by half a day in e^{-wb h}; one Halley step from there
     * for [s, e] (O(1), one exp) */
    double wb = p->wb, g = exp(-wb * h), E[4];
    for (int j = 0; j < 4; j++)
      E[j] = p->wE[j];
    if (!tf_isnan(d->y[e])) {
      double u = (double)(e - s), w = d->wcls[tf_cls(d, e)] / (g * g);
      E[0] += w;
      E[1] += w * u;
      E[2] += w * u * u;
      E[3] += w * u * u * u;
    }
    jps_der q;
    if (isfinite(g) && g > 0 &&
        jps_derivs(E, g, wb, h, iphi, beta, ap, S1p, d->rmean, isd, isd2,
                   &q) == 0 &&
        fabs(q.step) <= 0.1) {
      b = wb + q.step;
      coarse = 0;
      wg = g;
      wbg = wb;
    }
  }
  p->wok = 0;
  for (int it = 0; it < 16; it++) {
    double E[4];
    const double *rmax = coarse ? psum_rmax_lo : psum_rmax;
    int rc = psum_eval(p, b, 4, E, rmax);
    if (rc == 1) {
      tf_psum_reanchor(p, d, b);
      rc = psum_eval(p, b, 4, E, rmax);
    }
    if (rc != 0 || !(E[0] > 0) || !(E[0] <= DBL_MAX))
      break;
    jps_der q;
    /* e^{-b h}: after the warm start, from its e^{-wb h} times the short
     * series for the step (|b - wb| h <= 0.02 for most candidates) */
    double zh = (wbg - b) * h;
    double eh = fabs(zh) <= 0.02 ? wg * tf_expsmall(zh) : exp(-b * h);
    if (jps_derivs(E, eh, b, h, iphi, beta, ap, S1p, d->rmean, isd, isd2,
                   &q))
      break;
    if (!coarse) {
      p->wok = 1;
      p->wend = e;
      p->wb = b;
      for (int j = 0; j < 4; j++)
        p->wE[j] = E[j];
    }
    double step = q.step, f1 = q.f1, f2 = q.f2, f3 = q.f3;
    double sl = fabs(step) * span, lam2 = -f1 * q.sn;
    if (sl < 2e-5 && lam2 * sl * sl < 1e-9) {
      if (coarse) { /* close already: the same point with full sums */
        coarse = 0;
        continue;
      }
      double z = q.z;
      double f = b * S1p - 0.5 * z * z +
                 step * (f1 + step * (0.5 * f2 + step * f3 / 6));
      double f2n = f2 + f3 * step;
      if (!(f2n < 0))
        f2n = f2;
      b += step;
      double lp, bx = q.bx;
      if (ap >= 10) {
        /* lgamma(ap) - ap log(bx) - log sqrt(-f2n)
         *   = ap log(ap / bx) - log sqrt(ap (-f2n)) + lgamma_rest(ap) */
        lp = f + ap * log(ap * q.ibx) - 0.5 * log(ap * -f2n) +
             lgamma_rest(ap) + d->lvl0 - d->lrsd;
      } else {
        lp = f - ap * log(bx) + d->lvl0 + tf_lgamma(ap) - d->lrsd -
             0.5 * log(-f2n);
      }
      if (!isfinite(lp))
        break;
      *bio = b;
      *bvar = -1 / f2n;
      if (lvl) /* log(beta + x) moves by r m1 step */
        *lvl = ap / (bx * (1 + q.r * q.m1 * step));
      return lp;
    }
    double af1 = fabs(f1);
    if (!(af1 < af1p) || fabs(step) > 1)
      break;
    af1p = af1;
    coarse = 0;
    b += step;
  }
  p->wok = 0;
  *bio = b0;
  return tf_seg_jump(d, s, e, bio, bvar, lvl);
}

double tf_seg_jump_at(const tf_cpdata *d, size_t s, size_t e, double *b,
                      double *bvar, double *lvl) {
  tf_psum p;
  tf_psum_init(&p, s, isfinite(*b) ? *b : d->rmean);
  return tf_seg_jump_ps(d, &p, e, b, bvar, lvl);
}

/* ---- segment-length prior (METHODS A1) -------------------------------- */

/* log P(L > len) for L = min_seg - k + X, X ~ negative binomial (number of
 * trials for k successes of probability q); lq = log q, l1q = log(1 - q).
 * P(Bin(x, q) < k) with log C(x, i) by the recurrence
 * C(x, i) = C(x, i-1) (x - i + 1) / i: k logs and k exps, no lgamma. */
static double lsurv_nb(size_t len, int m, int k, double lq, double l1q) {
  if (len < (size_t)m)
    return 0;
  double x = (double)(len - (size_t)m + (size_t)k);
  double lt[50], mx = -INFINITY, lc = 0;
  for (int i = 0; i < k; i++) {
    if (i > 0)
      lc += log((x - i + 1) / i);
    lt[i] = lc + i * lq + (x - i) * l1q;
    if (lt[i] > mx)
      mx = lt[i];
  }
  double sum = 0;
  for (int i = 0; i < k; i++)
    sum += exp(lt[i] - mx);
  return mx + log(sum);
}

static double lpmf_nb(size_t len, int m, int k, double q) {
  if (len < (size_t)m)
    return -INFINITY;
  double x = (double)(len - (size_t)m + (size_t)k);
  return tf_lgamma(x) - tf_lgamma((double)k) - tf_lgamma(x - k + 1) + k * log(q) +
         (x - k) * log1p(-q);
}

int tf_lenprior_init(tf_lenprior *lp, size_t n, int m, int k, double mean) {
  memset(lp, 0, sizeof *lp);
  lp->n = n;
  lp->mean = mean;
  lp->min_seg = m;
  lp->shape = k;
  double q = k / (mean - m + k), lq = log(q), l1q = log1p(-q);
  size_t far = n + (size_t)m + (size_t)ceil(60.0 * (k + 1) / q) + 10;
  lp->lg = malloc((n + 1) * sizeof(double));
  lp->lS = malloc((n + 1) * sizeof(double));
  lp->lg0 = malloc((n + 1) * sizeof(double));
  lp->lS0 = malloc((n + 1) * sizeof(double));
  if (!lp->lg || !lp->lS || !lp->lg0 || !lp->lS0) {
    tf_lenprior_free(lp);
    return TWOFOLD_ENOMEM;
  }
  lp->lg[0] = -INFINITY;
  for (size_t l = 0; l <= n; l++) {
    if (l > 0)
      lp->lg[l] = lpmf_nb(l, m, k, q);
    lp->lS[l] = lsurv_nb(l, m, k, lq, l1q);
  }
  /* Stationary first segment: g0(l) = S(l-1)/mean, S0(l) = T(l)/mean with
   * T(l) = sum_{j >= l} S(j), summed from far out (geometric tail). */
  /* the terms grow as j falls (S is non-increasing): the sum is kept as
   * e^tm * ts with tm the latest term, one exp per term */
  double tm = lsurv_nb(far, m, k, lq, l1q) - log(q), ts = 1;
  for (size_t j = far; j-- > n + 1;) {
    double x = lsurv_nb(j, m, k, lq, l1q);
    if (x == -INFINITY)
      continue;
    if (tm == -INFINITY || x >= tm) {
      ts = tm == -INFINITY ? 1 : ts * exp(tm - x) + 1;
      tm = x;
    } else {
      ts += exp(x - tm);
    }
  }
  double T = tm + log(ts);
  double lmean = log(mean);
  for (size_t l = n + 1; l-- > 0;) {
    T = tf_lse(T, lp->lS[l]);
    lp->lS0[l] = T - lmean;
  }
  lp->lg0[0] = -INFINITY;
  for (size_t l = 1; l <= n; l++)
    lp->lg0[l] = lp->lS[l - 1] - lmean;
  return 0;
}

void tf_lenprior_free(tf_lenprior *lp) {
  if (!lp)
    return;
  free(lp->lg);
  free(lp->lS);
  free(lp->lg0);
  free(lp->lS0);
  lp->lg = lp->lS = lp->lg0 = lp->lS0 = NULL;
}

/* ---- once-per-series estimates: weekday effects and dispersion ---------
 *
 * A Poisson log-linear fit with a separate level and slope in each block
 * of 14 days (two whole weeks, so every weekday is balanced) and weekday
 * effects shared by all blocks, by penalized Newton (weak normal priors
 * keep all-zero blocks finite); the 2x2 block systems are eliminated by
 * the Schur complement, so the cost is O(n).  phi is the Pearson X^2/df of
 * that fit, made robust to backlog spikes by winsorizing squared Pearson
 * residuals at 9 phi (iterated, divided by E min(Z^2, 9) = 0.99501 for a
 * normal Z), floored at 1 (Poisson).  McCullagh & Nelder (1989,
 * Generalized Linear Models, 2nd ed., sec. 4.5) for the Pearson estimate;
 * winsorizing is common practice, no source. */

#define BLOCK 14

typedef struct {
  size_t lo, hi; /* days [lo, hi) */
  double a, b, c; /* level, slope per week, centre day */
} fit_block;

static int solve_sym(double *A, double *x, int p) {
  /* Cholesky of the p x p SPD matrix A (row-major), solve A x = rhs in x. */
  for (int j = 0; j < p; j++) {
    double s = A[j * p + j];
    for (int k = 0; k < j; k++)
      s -= A[j * p + k] * A[j * p + k];
    if (!(s > 0))
      return -1;
    double l = sqrt(s);
    A[j * p + j] = l;
    for (int i = j + 1; i < p; i++) {
      double t = A[i * p + j];
      for (int k = 0; k < j; k++)
        t -= A[i * p + k] * A[j * p + k];
      A[i * p + j] = t / l;
    }
  }
  for (int i = 0; i < p; i++) {
    double t = x[i];
    for (int k = 0; k < i; k++)
      t -= A[i * p + k] * x[k];
    x[i] = t / A[i * p + i];
  }
  for (int i = p; i-- > 0;) {
    double t = x[i];
    for (int k = i + 1; k < p; k++)
      t -= A[k * p + i] * x[k];
    x[i] = t / A[i * p + i];
  }
  return 0;
}

static double pfit_obj(const tf_cpdata *d, const fit_block *bl, size_t nb,
                       const double *dl, int nd, double a0) {
  double f = 0;
  for (size_t k = 0; k < nb; k++) {
    for (size_t t = bl[k].lo; t < bl[k].hi; t++) {
      if (tf_isnan(d->y[t]))
        continue;
      int c = tf_cls(d, t);
      double eta = bl[k].a + bl[k].b * ((double)t - bl[k].c) / 7 +
                   (nd && c > 0 ? dl[c - 1] : 0);
      f += d->y[t] * eta - exp(eta);
    }
    f -= (bl[k].a - a0) * (bl[k].a - a0) / 200 + bl[k].b * bl[k].b / 4.5;
  }
  for (int c = 0; c < nd; c++)
    f -= dl[c] * dl[c] / 2;
  return f;
}

static int estimate_effects(tf_cpdata *d, int weekday, int want_phi) {
  size_t n = d->n;
  size_t nb = (n + BLOCK - 1) / BLOCK;
  if (nb > 1 && n - (nb - 1) * BLOCK < BLOCK / 2)
    nb--;
  fit_block *bl = calloc(nb, sizeof *bl);
  double *sv = malloc(nb * 2 * sizeof(double));
  /* per block from the first pass of an iteration: H (3), g (2), C (2 x 6) */
  double *bs = malloc(nb * 17 * sizeof(double));
  if (!bl || !sv || !bs) {
    free(bl);
    free(sv);
    free(bs);
    return TWOFOLD_ENOMEM;
  }
  double a0 = log(d->ybar);
  for (size_t k = 0; k < nb; k++) {
    bl[k].lo = k * BLOCK;
    bl[k].hi = k + 1 == nb ? n : (k + 1) * BLOCK;
    bl[k].c = 0.5 * ((double)bl[k].lo + (double)bl[k].hi - 1);
    double Y = d->cy[bl[k].hi] - d->cy[bl[k].lo];
    double W = (double)(bl[k].hi - bl[k].lo) -
               (double)(d->cmiss[bl[k].hi] - d->cmiss[bl[k].lo]);
    bl[k].a = W > 0 ? log((Y + 0.5) / W) : a0;
    bl[k].b = 0;
  }
  int nd = weekday ? 6 : 0;
  double dl[6] = {0, 0, 0, 0, 0, 0};
  double f = pfit_obj(d, bl, nb, dl, nd, a0);
  for (int it = 0; it < 60; it++) {
    double S[36], r[6];
    memset(S, 0, sizeof S);
    memset(r, 0, sizeof r);
    /* shared block: D and its gradient */
    double Dd[6] = {0}, gd[6] = {0};
    for (size_t k = 0; k < nb; k++) {
      double H[3] = {1.0 / 100, 0, 1 / 2.25}, g[2], C[2][6];
      g[0] = -(bl[k].a - a0) / 100;
      g[1] = -bl[k].b / 2.25;
      memset(C, 0, sizeof C);
      for (size_t t = bl[k].lo; t < bl[k].hi; t++) {
        if (tf_isnan(d->y[t]))
          continue;
        int c = tf_cls(d, t);
        double u = ((double)t - bl[k].c) / 7;
        double eta =
            bl[k].a + bl[k].b * u + (nd && c > 0 ? dl[c - 1] : 0);
        double mu = exp(eta), res = d->y[t] - mu;
        H[0] += mu;
        H[1] += mu * u;
        H[2] += mu * u * u;
        g[0] += res;
        g[1] += res * u;
        if (nd && c > 0) {
          C[0][c - 1] += mu;
          C[1][c - 1] += mu * u;
          Dd[c - 1] += mu;
          gd[c - 1] += res;
        }
      }
      double *keep = bs + 17 * k;
      memcpy(keep, H, 3 * sizeof(double));
      memcpy(keep + 3, g, 2 * sizeof(double));
      memcpy(keep + 5, C, 12 * sizeof(double));
      double det = H[0] * H[2] - H[1] * H[1];
      double Hi[3] = {H[2] / det, -H[1] / det, H[0] / det};
      /* Schur complement contributions */
      for (int i = 0; i < nd; i++) {
        double hi0 = Hi[0] * C[0][i] + Hi[1] * C[1][i];
        double hi1 = Hi[1] * C[0][i] + Hi[2] * C[1][i];
        r[i] -= hi0 * g[0] + hi1 * g[1];
        for (int j = 0; j < nd; j++)
          S[i * 6 + j] -= hi0 * C[0][j] + hi1 * C[1][j];
      }
    }
    double z[6] = {0, 0, 0, 0, 0, 0};
    if (nd) {
      double A[36];
      for (int i = 0; i < 6; i++)
        for (int j = 0; j < 6; j++)
          A[i * 6 + j] = S[i * 6 + j] + (i == j ? Dd[i] + 1.0 : 0.0);
      for (int i = 0; i < 6; i++)
        z[i] = r[i] + gd[i] - dl[i];
      if (solve_sym(A, z, 6) != 0)
        break;
    }
    /* block steps x_k = H_k^-1 (g_k - C_k z), from the first pass's sums */
    double *da = sv; /* reuse: da[2k], da[2k+1] */
    for (size_t k = 0; k < nb; k++) {
      const double *H = bs + 17 * k, *g = H + 3, *C0 = H + 5, *C1 = H + 11;
      double Cz[2] = {0, 0};
      for (int i = 0; i < nd; i++) {
        Cz[0] += C0[i] * z[i];
        Cz[1] += C1[i] * z[i];
      }
      double det = H[0] * H[2] - H[1] * H[1];
      double r0 = g[0] - Cz[0], r1 = g[1] - Cz[1];
      da[2 * k] = (H[2] * r0 - H[1] * r1) / det;
      da[2 * k + 1] = (H[0] * r1 - H[1] * r0) / det;
    }
    /* step halving on the penalized log-likelihood */
    double mstep = 0;
    for (size_t k = 0; k < 2 * nb; k++)
      mstep = fmax(mstep, fabs(da[k]));
    for (int c = 0; c < nd; c++)
      mstep = fmax(mstep, fabs(z[c]));
    double lam = mstep > 5 ? 5 / mstep : 1;
    double odl[6];
    memcpy(odl, dl, sizeof odl);
    double fn = f;
    int ok = 0;
    for (int h = 0; h < 30; h++) {
      for (size_t k = 0; k < nb; k++) {
        bl[k].a += lam * da[2 * k];
        bl[k].b += lam * da[2 * k + 1];
      }
      for (int c = 0; c < nd; c++)
        dl[c] = odl[c] + lam * z[c];
      fn = pfit_obj(d, bl, nb, dl, nd, a0);
      if (fn >= f - 1e-12 * fabs(f)) {
        ok = 1;
        break;
      }
      for (size_t k = 0; k < nb; k++) {
        bl[k].a -= lam * da[2 * k];
        bl[k].b -= lam * da[2 * k + 1];
      }
      lam *= 0.5;
    }
    if (!ok) {
      memcpy(dl, odl, sizeof odl);
      break;
    }
    double df = fn - f;
    f = fn;
    if (lam * mstep < 1e-9 || df < 1e-10 * (1 + fabs(f)))
      break;
  }
  /* weekday effects, centred to sum zero */
  double full[7] = {0, 0, 0, 0, 0, 0, 0}, mean = 0;
  for (int c = 1; c < 7; c++)
    full[c] = nd ? dl[c - 1] : 0;
  for (int c = 0; c < 7; c++)
    mean += full[c] / 7;
  for (int c = 0; c < 7; c++)
    d->delta[c] = weekday ? full[c] - mean : 0;
  if (want_phi) {
    size_t np = n - d->nmiss;
    double p = 2.0 * (double)nb + nd;
    double df = (double)np - p;
    double phi = 1;
    if (df >= 5) {
      double *r2 = malloc(np * sizeof(double));
      if (!r2) {
        free(bl);
        free(sv);
        free(bs);
        return TWOFOLD_ENOMEM;
      }
      size_t m = 0;
      for (size_t k = 0; k < nb; k++)
        for (size_t t = bl[k].lo; t < bl[k].hi; t++) {
          if (tf_isnan(d->y[t]))
            continue;
          int c = tf_cls(d, t);
          double eta = bl[k].a + bl[k].b * ((double)t - bl[k].c) / 7 +
                       (nd && c > 0 ? dl[c - 1] : 0);
          double mu = exp(eta);
          r2[m++] = (d->y[t] - mu) * (d->y[t] - mu) / mu;
        }
      double sum = 0;
      for (size_t i = 0; i < m; i++)
        sum += r2[i];
      phi = sum / df;
      for (int it = 0; it < 20; it++) {
        double cap = 9 * (phi > 1 ? phi : 1), s2 = 0;
        for (size_t i = 0; i < m; i++)
          s2 += r2[i] < cap ? r2[i] : cap;
        double nphi = s2 / (df * 0.9950073);
        if (fabs(nphi - phi) < 1e-12 * phi) {
          phi = nphi;
          break;
        }
        phi = nphi;
      }
      free(r2);
    }
    d->phi = phi > 1 ? phi : 1;
  }
  free(bl);
  free(sv);
  free(bs);
  return 0;
}

void tf_cp_data_free(tf_cpdata *d) {
  if (!d)
    return;
  free(d->y);
  free(d->cy);
  free(d->cty);
  free(d->cw);
  free(d->cconst);
  free(d->cmiss);
  free(d->miss);
  memset(d, 0, sizeof *d);
}

int tf_cp_prepare(tf_cpdata *d, const struct twofold_cp_options *o,
                  const double *y, size_t n, int first_weekday) {
  memset(d, 0, sizeof *d);
  d->n = n;
  d->kind = o->kind;
  d->cls0 = first_weekday - 1;
  d->alpha = o->alpha;
  d->rmean = o->rmean;
  d->rsd = o->rsd;
  d->phi = o->phi > 0 ? o->phi : 1;
  d->y = malloc((n ? n : 1) * sizeof(double));
  d->cy = malloc((n + 1) * sizeof(double));
  d->cty = malloc((n + 1) * sizeof(double));
  d->cw = malloc((n + 1) * sizeof(double));
  d->cconst = malloc((n + 1) * sizeof(double));
  d->cmiss = malloc((n + 1) * sizeof(size_t));
  size_t nm = 0;
  for (size_t t = 0; t < n; t++)
    nm += tf_isnan(y[t]);
  d->miss = malloc((nm ? nm : 1) * sizeof(size_t));
  if (!d->y || !d->cy || !d->cty || !d->cw || !d->cconst || !d->cmiss ||
      !d->miss) {
    tf_cp_data_free(d);
    return TWOFOLD_ENOMEM;
  }
  if (n)
    memcpy(d->y, y, n * sizeof(double));
  d->nmiss = 0;
  d->cmiss[0] = 0;
  d->cy[0] = d->cty[0] = 0;
  for (size_t t = 0; t < n; t++) {
    int m = tf_isnan(y[t]);
    if (m)
      d->miss[d->nmiss++] = t;
    d->cmiss[t + 1] = d->cmiss[t] + (size_t)m;
    d->cy[t + 1] = d->cy[t] + (m ? 0 : y[t]);
    d->cty[t + 1] = d->cty[t] + (m ? 0 : (double)t * y[t]);
  }
  size_t np = n - d->nmiss;
  d->ybar = (d->cy[n] + 0.5) / (np ? (double)np : 1.0);
  int rc = 0;
  if (o->weekday || o->phi == 0)
    rc = estimate_effects(d, o->weekday, o->phi == 0);
  if (rc) {
    tf_cp_data_free(d);
    return rc;
  }
  double W = 0, cst = 0;
  d->cw[0] = 0;
  d->cconst[0] = 0;
  for (int c = 0; c < 7; c++)
    d->wcls[c] = exp(d->delta[c]);
  for (size_t t = 0; t < n; t++) {
    if (!tf_isnan(y[t])) {
      int c = tf_cls(d, t);
      W += d->wcls[c];
      cst += (y[t] * d->delta[c] - tf_lgamma(y[t] + 1)) / d->phi;
    }
    d->cw[t + 1] = W;
    d->cconst[t + 1] = cst;
  }
  d->ybar = (d->cy[n] + 0.5) / (W > 0 ? W : 1.0);
  d->beta = o->beta > 0 ? o->beta : o->alpha / d->ybar;
  tf_cp_constants(d);
  return 0;
}

void tf_cp_constants(tf_cpdata *d) {
  d->lbeta = log(d->beta);
  d->lvl0 = d->alpha * d->lbeta - tf_lgamma(d->alpha);
  d->lphi = log(d->phi);
  d->lrsd = log(d->rsd);
  d->iphi = 1 / d->phi;
  d->irsd2 = 1 / (d->rsd * d->rsd);
}
