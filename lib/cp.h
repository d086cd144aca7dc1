/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Private to the changepoint module (changes.c, segment.c, online.c). */
#ifndef TWOFOLD_CP_H
#define TWOFOLD_CP_H

#include "internal.h"

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

/* The options object. */
struct twofold_cp_options {
  int kind;
  double mean_len;     /* mean segment length, days                      */
  int min_seg;         /* minimum segment length                         */
  int shape;           /* negative-binomial shape k                      */
  double rmean, rsd;   /* growth-rate prior                              */
  double alpha, beta;  /* level prior (beta 0: scale-aware default)      */
  double phi;          /* 0: estimate                                    */
  int weekday;
  double prune;
  int max_changes;
  double level;
  int grid;
  int clean;
  char msg[TF_ERRMSG_SIZE];
};

void tf_cp_options_defaults(struct twofold_cp_options *o);

/* A series prepared for segment computations: weekday weights, dispersion,
 * priors and prefix sums over days (index t covers days 0..t-1). */
typedef struct tf_cpdata {
  size_t n;
  int kind;
  int cls0;            /* class (ISO weekday - 1) of day 0                */
  double delta[7];     /* weekday effects by class, sum zero             */
  double wcls[7];      /* exp(delta)                                     */
  double phi, alpha, beta, rmean, rsd;
  double *y;           /* copy, NaN missing                              */
  double *cy, *cty, *cw, *cconst; /* prefix sums, n+1 each              */
  size_t *cmiss;       /* missing days before t, n+1                     */
  size_t *miss;        /* indices of missing days                        */
  size_t nmiss;
  double ybar;         /* (Y + 0.5) / W over the series                  */
  /* constants of the segment marginals, set by tf_cp_constants() */
  double lvl0;         /* alpha log beta - lgamma(alpha)                 */
  double lbeta, lphi, lrsd; /* log beta, log phi, log rsd                */
  double iphi, irsd2;  /* 1 / phi, 1 / rsd^2                              */
} tf_cpdata;

/* Set the constants above from alpha, beta, phi and rsd; tf_cp_prepare
 * calls it, and so must any code that changes those fields afterwards. */
void tf_cp_constants(tf_cpdata *d);

/* Fill d from y (validated by the caller).  phi_opt 0 estimates phi;
 * weekday 0 leaves the effects at zero.  beta 0 takes alpha / ybar.
 * Returns 0 or TWOFOLD_ENOMEM. */
int tf_cp_prepare(tf_cpdata *d, const struct twofold_cp_options *o,
                  const double *y, size_t n, int first_weekday);
void tf_cp_data_free(tf_cpdata *d);

/* Class of day t. */
static inline int tf_cls(const tf_cpdata *d, size_t t) {
  return (int)((size_t)d->cls0 + t) % 7;
}

/* Sums over the present days of [s, e]: Y, sum t*y. */
static inline double tf_sumy(const tf_cpdata *d, size_t s, size_t e) {
  return d->cy[e + 1] - d->cy[s];
}
static inline double tf_sumty(const tf_cpdata *d, size_t s, size_t e) {
  return d->cty[e + 1] - d->cty[s];
}

/* log E0, E1/E0 and E2/E0 of E_k = sum_{t=s..e, present} w_t (t-c)^k
 * e^{b (t-c)}, by closed-form geometric sums per weekday class (METHODS
 * B2, B3).  m1, m2 may be NULL. */
void tf_esums(const tf_cpdata *d, size_t s, size_t e, double c, double b,
              double *logE0, double *m1, double *m2);

/* e^z for |z| <= 0.02 by its Taylor polynomial of degree 7 (remainder
 * below 7e-19 relative) */
static inline double tf_expsmall(double z) {
  return 1 +
         z * (1 + z * 0.5 *
                      (1 + z * (1.0 / 3) *
                               (1 + z * 0.25 *
                                        (1 + z * 0.2 *
                                                 (1 + z * (1.0 / 6) *
                                                          (1 + z * (1.0 / 7)))))));
}

/* ---- power sums, shared by tf_psum (JUMP) and tf_ksums (KINK) ---------
 *
 * For a segment start, A_k = sum_t w_t v_t^k over its present days, v_t
 * the (scaled) distance of day t from the segment's origin; a day's
 * terms are added by tf_pow_add, and the Taylor shift
 *     E_j = sum_{k < n} q^k / k!  A_{j+k},   j = 0..3,
 * is tf_pow_shift4 (the truncation n is the caller's: see tf_psum and
 * kink_laplace.c). */
#define TF_POW_PAIRS 11 /* up to 22 powers */

/* 1 / (k (k - 1)), k >= 2 */
static const double tf_pow_inv2[TF_POW_PAIRS * 2] = {
    0,          0,          1.0 / 2,    1.0 / 6,    1.0 / 12,  1.0 / 20,
    1.0 / 30,   1.0 / 42,   1.0 / 56,   1.0 / 72,   1.0 / 90,  1.0 / 110,
    1.0 / 132,  1.0 / 156,  1.0 / 182,  1.0 / 210,  1.0 / 240, 1.0 / 272,
    1.0 / 306,  1.0 / 342,  1.0 / 380,  1.0 / 420};

/* A day's terms t0 v^k, k < 2 npair (4 <= npair <= TF_POW_PAIRS), in
 * pairs w[j] = (t0 v^2j, t0 v^(2j+1)): v^2 and v^4 by squaring, the
 * higher ones by steps of v^8 from four pairs back (short chains). */
static inline void tf_pow_terms(tf_v2d *w, int npair, double t0, double v) {
  double v2 = v * v, v4 = v2 * v2, v8 = v4 * v4, t1 = t0 * v;
  tf_v2d q4 = {v4, v4}, q8 = {v8, v8};
  w[0] = (tf_v2d){t0, t1};
  w[1] = (tf_v2d){t0 * v2, t1 * v2};
  w[2] = w[0] * q4;
  w[3] = w[1] * q4;
#pragma GCC unroll 8
  for (int j = 4; j < npair; j++)
    w[j] = w[j - 4] * q8;
}

/* A[k] += t0 v^k, k < npow (8 <= npow <= 2 TF_POW_PAIRS). */
static inline void tf_pow_add(double *A, int npow, double t0, double v) {
  tf_v2d w[TF_POW_PAIRS];
  tf_pow_terms(w, (npow + 1) / 2, t0, v);
#pragma GCC unroll 11
  for (int j = 0; j < npow / 2; j++)
    tf_v2d_addto(A + 2 * j, w[j]);
  if (npow % 2)
    A[npow - 1] += w[npow / 2][0];
}

/* E[j] = sum_{k < n} q^k / k! A[j + k], j = 0..3 (A holds n + 3 values,
 * n <= 2 TF_POW_PAIRS - 3), largest terms first in two interleaved chains,
 * c_k = c_{k-2} q^2 / (k (k - 1)) for the even and the odd k, each
 * carrying (E0, E1) and (E2, E3) in pairs. */
static inline void tf_pow_shift4(const double *A, int n, double q,
                                 double *E) {
  double q2 = q * q, ce = 1, co = q;
  tf_v2d e01 = tf_v2d_load(A), e23 = tf_v2d_load(A + 2);
  tf_v2d o01 = {0, 0}, o23 = {0, 0};
  int k = 1;
  for (; k + 1 < n; k += 2) {
    tf_v2d vo = {co, co};
    o01 += vo * tf_v2d_load(A + k);
    o23 += vo * tf_v2d_load(A + k + 2);
    ce *= q2 * tf_pow_inv2[k + 1];
    co *= q2 * tf_pow_inv2[k + 2];
    tf_v2d ve = {ce, ce};
    e01 += ve * tf_v2d_load(A + k + 1);
    e23 += ve * tf_v2d_load(A + k + 3);
  }
  if (k < n) {
    tf_v2d vo = {co, co};
    o01 += vo * tf_v2d_load(A + k);
    o23 += vo * tf_v2d_load(A + k + 2);
  }
  tf_v2d_store(E, e01 + o01);
  tf_v2d_store(E + 2, e23 + o23);
}

/* Incremental power sums for one segment start (METHODS B3; the Taylor
 * shift is derived here).  For a reference start s and slope bref, over
 * the present days t of [s, next) with u = t - s and w_t = wcls of the
 * day's weekday class,
 *   A_k = sum_t w_t (u / TF_PSUM_SCALE)^k e^{bref u},  k = 0..TF_PSUM_N-1,
 * so that for any b near bref (delta = b - bref, rho = |delta| umax)
 *   E_j(b) = sum_t w_t u^j e^{b u}
 *          = TF_PSUM_SCALE^j sum_k (TF_PSUM_SCALE delta)^k / k! A_{j+k}.
 * The series is cut at 12, 16 or 19 terms, the first of these with
 * rho^k / k! e^{2 rho} < 2^-56 at k terms, a bound on the remainder
 * relative to E_j; tf_psum_eval refuses when that
 * needs more terms than stored or rho > 1 (then re-anchor).  With rho <= 1
 * an alternating series loses at most 3 bits to cancellation; E_j is
 * within 1e-14 (1 + |b| umax) relative of the direct sum, the rounding of
 * the sums and the conditioning of e^{b u} (tests/check_psum.c).
 * Adding a day costs O(TF_PSUM_N) flops and no exponential (e^{bref u} by
 * a running product, refreshed by exp every 32 days); re-anchoring is a
 * direct O(L) pass.  Nothing here depends on the segment kind: only the
 * weekday weights and missing days of d are read. */
#define TF_PSUM_N 22
#define TF_PSUM_NMOM 4 /* E_0..E_3 */
#define TF_PSUM_SCALE 64.0
typedef struct tf_psum {
  size_t s;      /* reference start day                              */
  size_t next;   /* the sums cover days s..next-1                    */
  size_t np;     /* present days among them                          */
  double umax;   /* largest u of a present day (0: none)             */
  double bref;   /* reference slope                                  */
  double g0, g1; /* e^{bref} = g0 + g1 (g1 the rounding correction)  */
  double z;      /* e^{bref (next - s)}                              */
  int bad;       /* sums left double range: unusable                 */
  double A[TF_PSUM_N];
  /* the last full evaluation of tf_seg_jump_ps, kept to start the fit of
   * the segment one day longer (wok 0: none) */
  int wok;
  size_t wend;   /* the segment end it was made for                  */
  double wb;     /* the slope it was made at                          */
  double wE[4];  /* E_0..E_3 at wb over the days s..wend              */
} tf_psum;

/* Empty sums starting at day s, reference slope bref. */
void tf_psum_init(tf_psum *p, size_t s, double bref);
/* Add the days next..e (nothing when e < next); missing days are
 * skipped. */
void tf_psum_extend(tf_psum *p, const tf_cpdata *d, size_t e);
/* Recompute the sums of the days covered for a new reference slope (O(L),
 * one exp per 32 days). */
void tf_psum_reanchor(tf_psum *p, const tf_cpdata *d, double bref);
/* E[0..nmom-1] = E_j(b) about the reference start, nmom in
 * 1..TF_PSUM_NMOM.  Returns 0, 1 when b is too far from bref for the
 * stored terms (re-anchor and call again), or -1 when the sums are
 * unusable (overflow; the caller takes another method). */
int tf_psum_eval(const tf_psum *p, double b, int nmom, double *E);

/* JUMP segment [p->s, e] as tf_seg_jump, with the sums of p (extended to
 * e, re-anchored when needed): same model and result to about 1e-12 in
 * the log marginal, few exponentials.  Falls back to tf_seg_jump where the
 * sums do not apply. */
double tf_seg_jump_ps(const tf_cpdata *d, tf_psum *p, size_t e, double *b,
                      double *bvar, double *lvl);
/* tf_seg_jump_ps on fresh sums from s anchored at the start value *b
 * (O(L)): for single segments, so that they match the recursions. */
double tf_seg_jump_at(const tf_cpdata *d, size_t s, size_t e, double *b,
                      double *bvar, double *lvl);

/* LEVEL segment: exact log marginal likelihood (without the per-day
 * constants); *lvl (may be NULL) the posterior mean level. */
double tf_seg_level(const tf_cpdata *d, size_t s, size_t e, double *lvl);
/* JUMP segment: exact in the level, Laplace in the growth rate.  *b on
 * entry is the starting value, on return the posterior mode; *bvar the
 * Laplace variance; *lvl (may be NULL) the posterior mean level. */
double tf_seg_jump(const tf_cpdata *d, size_t s, size_t e, double *b,
                   double *bvar, double *lvl);

/* KINK segment (kink_laplace.c): the Laplace fit of [s, e] given the
 * level at its knot x_s ~ N(m, v) (METHODS B4; the knot sits at day s-1
 * and eta_t = x_s + b (t - s + 1)). */
/* Power sums of a kink segment whose start s is fixed while its end
 * grows, at a reference growth rate bref:
 *   A[k] = sum over the present days t = s..e of w_t u^k e^{bref u},
 *   u = t - s + 1 (the distance from the knot), k = 0..TF_KS_TERMS+2,
 * from which E0..E3 at b near bref follow by a Taylor series in
 * b - bref (kink_laplace.c).  All zero (live 0): not built yet. */
#define TF_KS_TERMS 16
typedef struct tf_ksums {
  int live;      /* 1: A holds the days s..e                          */
  int cls;       /* weekday class of day e                            */
  size_t e;      /* last day added                                    */
  double bref;   /* reference growth rate                             */
  double eb, z;  /* e^{bref} and e^{bref (e - s + 1)}                 */
  double A[TF_KS_TERMS + 3];
} tf_ksums;
typedef struct tf_kfit {
  double a, b;   /* posterior mode of (x_s, b); in: starting values (NAN:
                    from the prior) */
  double pa, pb; /* the previous mode, for extrapolation (NAN: none)   */
  double bvar;   /* posterior variance of b                            */
  double xm, xv; /* mean and variance of the end level a + b (e-s+1)   */
  tf_ksums ks;   /* power sums of [s, e] (zero: none yet)              */
  size_t next;   /* e + 1 of the fit the next three describe (0: none) */
  double haa, hab, hbb; /* negative Hessian at its last evaluation     */
  double p3;     /* there e^a E3 / phi (NAN: not known)                */
  double a0, ea0; /* e^{a0} computed by exp (ea0 0: none)              */
  double kv, iv;  /* 1/v for the v it was computed from (kv 0: none)   */
} tf_kfit;
/* log P(s, e) without the per-day constants (tf_cpdata.cconst); updates
 * *fit (warm start in, mode out).  Cheapest when called for e = s, s+1,
 * ... in turn with the same *fit, which then carries the power sums
 * forward; any other call rebuilds them (O(e - s)). */
double tf_seg_kink(const tf_cpdata *d, size_t s, size_t e, double m,
                   double v, tf_kfit *fit);

/* Segment-length prior tables (log), lengths 0..n. */
typedef struct tf_lenprior {
  size_t n;
  double *lg, *lS, *lg0, *lS0;
  double mean;
  int min_seg, shape; /* the parameters the tables were made for */
} tf_lenprior;

int tf_lenprior_init(tf_lenprior *lp, size_t n, int min_seg, int shape,
                     double mean);
void tf_lenprior_free(tf_lenprior *lp);
/* log pmf of length len for a segment starting at s (s == 0: first). */
static inline double tf_lg(const tf_lenprior *lp, size_t s, size_t len) {
  return s == 0 ? lp->lg0[len] : lp->lg[len];
}
/* log P(length >= len). */
static inline double tf_lsurv(const tf_lenprior *lp, size_t s, size_t len) {
  return s == 0 ? lp->lS0[len - 1] : lp->lS[len - 1];
}

/* A sum of exponentials kept as e^m * s with m the largest exponent so far
 * (start from m = -inf, s = 0): one exponential per term instead of the
 * exp and log1p of a pairwise tf_lse. */
static inline double tf_lsum_addq(double *m, double *s, double x) {
  if (x == -INFINITY)
    return 0;
  if (x <= *m) {
    double q = exp(x - *m);
    *s += q;
    return q;
  }
  *s = *m == -INFINITY ? 1 : *s * exp(*m - x) + 1;
  *m = x;
  return 1;
}

/* The same without the term's e^{x - m} (tf_lsum_addq returns it, against
 * the largest m after the term). */
static inline void tf_lsum_add(double *m, double *s, double x) {
  (void)tf_lsum_addq(m, s, x);
}

static inline double tf_lsum_log(double m, double s) {
  return m == -INFINITY ? -INFINITY : m + log(s);
}

/* log sum_i e^{x[i]} (-inf when n is 0 or every x[i] is -inf): the largest
 * first, then one exponential per term against it. */
static inline double tf_lse_array(const double *x, size_t n) {
  double m = -INFINITY;
  for (size_t i = 0; i < n; i++)
    if (x[i] > m)
      m = x[i];
  if (m == -INFINITY)
    return -INFINITY;
  double s = 0;
  for (size_t i = 0; i < n; i++)
    s += exp(x[i] - m);
  return m + log(s);
}

/* Draw dr of a sampled segmentation: segment [s, e] with growth rate b
 * into rate (NULL: not wanted) and, when a change follows it, a 1 on day
 * e+1 of change (NULL: not wanted); returns 1 for that change, else 0. */
static inline size_t tf_sample_put(size_t n, size_t dr, size_t s, size_t e,
                                   double b, double *rate,
                                   unsigned char *change) {
  if (rate)
    for (size_t t = s; t <= e; t++)
      rate[dr * n + t] = b;
  if (e + 1 >= n)
    return 0;
  if (change)
    change[dr * n + e + 1] = 1;
  return 1;
}

/* Whether every argument is finite: x - x is 0 for a finite x and NaN for
 * an infinite or NaN one (a few subtractions and one comparison, where
 * isfinite costs a mask and a comparison each). */
static inline int tf_finite2(double a, double b) {
  return (a - a) + (b - b) == 0;
}
static inline int tf_finite4(double a, double b, double c, double d) {
  return ((a - a) + (b - b)) + ((c - c) + (d - d)) == 0;
}

static inline double tf_lse(double a, double b) {
  if (a == -INFINITY)
    return b;
  if (b == -INFINITY)
    return a;
  return a > b ? a + log1p(exp(b - a)) : b + log1p(exp(a - b));
}

/* A small deterministic generator (xoshiro256**, seeded by splitmix64). */
typedef struct tf_rng {
  uint64_t s[4];
} tf_rng;
void tf_rng_seed(tf_rng *r, uint64_t seed);
double tf_rng_unif(tf_rng *r);  /* in (0, 1) */
double tf_rng_norm(tf_rng *r);

/* Reporting artefacts set missing in y (copy) as twofold_cp_options_set_clean
 * documents; returns the number of days set missing. */
size_t tf_cp_clean(double *y, size_t n);

/* Validation shared by the offline run and the online filter. */
int tf_cp_check_counts(const double *y, size_t n, char *msg);


/* The posterior object.  Fields filled by the JUMP/LEVEL recursions
 * (changes.c) or by the KINK grid recursions (kink.c). */
struct twofold_changes {
  int status;
  char msg[TF_ERRMSG_SIZE];
  int ok;
  size_t n;
  struct twofold_cp_options opt;
  tf_cpdata d;
  tf_lenprior lp;
  double logZ;     /* log p(y) without the per-day constants */
  /* JUMP/LEVEL: recursions and the segment cache */
  double *Q, *Fa;  /* n+1 each (Fa: KINK only) */
  size_t *stop, *off;
  double *clogP, *cb, *cv;
  size_t ncache, capcache;
  /* KINK (Laplace) with the direct cache: clogP, cb, cv and the forward
   * pass's W (pool[3]) point into these buffers, kept from run to run
   * (capacity poolcap entries each), so a reused object does not take
   * fresh pages for every series; cache_pooled: clogP etc. are pool[0..2]
   * and not to be freed on their own. */
  double *pool[4];
  size_t poolcap;
  int cache_pooled;
  /* JUMP and LEVEL: clogP, cb and cv point into jbuf[0..2] (capacity
   * jbufcap entries each), kept from run to run; jbuf[3] holds T(s, e)
   * per cache entry from the backward pass, for tf_cp_results */
  double *jbuf[4];
  size_t jbufcap;
  /* results */
  double *pch, *gmean, *gsd; /* n each */
  double *kprob;             /* max_changes + 1 */
  double ktail, kmean;
  size_t nmap;
  size_t *mapstart;          /* nmap + 1 segment starts */
  double *mapb, *mapbsd, *maplvl; /* per MAP segment */
  size_t ncleaned;
  /* KINK */
  struct tf_kink *kink;
  int shrunk;      /* twofold_changes_shrink: no sampling data kept */
};

int tf_kink_run(struct twofold_changes *ch);
/* KINK by collapsed Laplace messages (grid 0): fills Q, Fa, stop, off and
 * the segment cache as the JUMP recursions do, then the results. */
int tf_kinkl_run(struct twofold_changes *ch);
/* Results from Q, stop, off and the segment cache: change probabilities,
 * growth, the count distribution and the MAP segmentation.  cw, if not
 * NULL: per cache entry the weight W(s, e) of the segment given that a
 * segment ends at e (given y for e = n-1), as the forward pass of KINK
 * computes it, with Fa[0..n-1] filled by the same pass; otherwise the
 * pass takes the backward quantities alone: ct, if not NULL, per cache
 * entry T(s, e) = P(s, e) g(e-s+1) Q(e+1) / Q(s) as the JUMP and LEVEL
 * backward pass leaves it (0 where impossible), else one exp per
 * candidate. */
int tf_cp_results(struct twofold_changes *ch, const double *cw,
                  const double *ct);
void tf_kink_free(struct tf_kink *k);
int tf_kink_sample(const struct twofold_changes *ch, uint64_t seed,
                   size_t draws, unsigned char *change, double *rate,
                   size_t *count);

#endif
