/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Unit and reference tests of the changepoint module.  Outside references
 * are named beside each check.
 */
#define _POSIX_C_SOURCE 200809L
#include "twofold.h"
#include "benchgen.h"

#include <check.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sf_gamma.h>
#include <gsl/gsl_sf_psi.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static double lse2(double a, double b) {
  if (a == -INFINITY)
    return b;
  if (b == -INFINITY)
    return a;
  return a > b ? a + log1p(exp(b - a)) : b + log1p(exp(a - b));
}

/* A seeded Poisson series with a change in rate, from GSL's generator
 * (test input only). */
static void sim_series(double *y, size_t n, unsigned long seed, double l1,
                       double l2, size_t cp, double g1, double g2) {
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, seed);
  for (size_t t = 0; t < n; t++) {
    double mu = t < cp ? l1 * exp(g1 * (double)t)
                       : l2 * exp(g2 * (double)(t - cp));
    y[t] = (double)gsl_ran_poisson(r, mu);
  }
  gsl_rng_free(r);
}

/* ---- brute-force enumeration of every segmentation ---------------------
 * Each segmentation of days 0..n-1 (a bit per gap) gets the weight
 * prod_j P(s_j, e_j) g(len_j) (first segment: g0; last: survival) from the
 * library's own segment marginal and length prior: the recursions
 * (Fearnhead 2006, Stat Comput 16:203-213, sec. 2) must reproduce the
 * normalised enumeration. */
typedef struct {
  double logZ;
  double pch[20];
  double pk[20];
  unsigned map;
} brute_t;

static void brute(const twofold_changes *ch, size_t n, brute_t *out) {
  double lml[20][20];
  for (size_t s = 0; s < n; s++)
    for (size_t e = s; e < n; e++)
      ck_assert_int_eq(twofold_changes_segment_logml(ch, s, e, &lml[s][e]),
                       0);
  size_t ns = (size_t)1 << (n - 1);
  double *lw = malloc(ns * sizeof(double));
  ck_assert_ptr_nonnull(lw);
  double Z = -INFINITY, best = -INFINITY;
  for (size_t m = 0; m < ns; m++) {
    double w = 0;
    size_t s = 0;
    for (size_t e = 0; e < n; e++) {
      int end = e + 1 == n || ((m >> e) & 1);
      if (!end)
        continue;
      double lp, ls;
      ck_assert_int_eq(
          twofold_changes_length_prior(ch, e - s + 1, s == 0, &lp, &ls), 0);
      w += lml[s][e] + (e + 1 == n ? ls : lp);
      s = e + 1;
    }
    lw[m] = w;
    Z = lse2(Z, w);
    if (w > best) {
      best = w;
      out->map = (unsigned)m;
    }
  }
  out->logZ = Z;
  memset(out->pch, 0, sizeof out->pch);
  memset(out->pk, 0, sizeof out->pk);
  for (size_t m = 0; m < ns; m++) {
    double p = exp(lw[m] - Z);
    int k = 0;
    for (size_t g = 0; g + 1 < n; g++)
      if ((m >> g) & 1) {
        out->pch[g + 1] += p;
        k++;
      }
    out->pk[k] += p;
  }
  free(lw);
}

static void check_against_brute(int kind, const double *y, size_t n,
                                int minseg, int shape, double prob,
                                int weekday, double phi, double prune) {
  twofold_cp_options *o;
  ck_assert_int_eq(twofold_cp_options_new(&o), 0);
  ck_assert_int_eq(twofold_cp_options_set_kind(o, kind), 0);
  ck_assert_int_eq(twofold_cp_options_set_min_segment(o, minseg), 0);
  ck_assert_int_eq(twofold_cp_options_set_length_shape(o, shape), 0);
  ck_assert_int_eq(twofold_cp_options_set_change_prob(o, prob), 0);
  ck_assert_int_eq(twofold_cp_options_set_weekday(o, weekday), 0);
  ck_assert_int_eq(twofold_cp_options_set_dispersion(o, phi), 0);
  ck_assert_int_eq(twofold_cp_options_set_prune(o, prune), 0);
  ck_assert_int_eq(twofold_cp_options_set_max_changes(o, 15), 0);
  twofold_changes *ch;
  ck_assert_int_eq(twofold_changes_new(&ch), 0);
  int rc = twofold_changes_run(ch, o, y, n, 3);
  ck_assert_msg(rc == 0, "run: %s", twofold_changes_errmsg(ch));
  brute_t b;
  brute(ch, n, &b);
  double p[20], pk[16], tail;
  ck_assert_int_eq(twofold_changes_p_change(ch, p), 0);
  ck_assert_int_eq(twofold_changes_count_prob(ch, pk, 16, &tail), 0);
  double maxd = 0;
  for (size_t i = 0; i < n; i++)
    maxd = fmax(maxd, fabs(p[i] - b.pch[i]));
  for (size_t k = 0; k < n && k < 16; k++)
    maxd = fmax(maxd, fabs(pk[k] - b.pk[k]));
  ck_assert_msg(maxd < 1e-9, "kind %d: max |recursion - enumeration| = %g",
                kind, maxd);
  /* the most probable segmentation */
  unsigned map = 0;
  for (size_t k = 0; k < twofold_changes_map_count(ch); k++) {
    size_t day;
    ck_assert_int_eq(twofold_changes_map_change(ch, k, &day, NULL, NULL,
                                                NULL),
                     0);
    map |= 1u << (day - 1);
  }
  ck_assert_uint_eq(map, b.map);
  /* sum_t P(change at t) = E[K] (METHODS A5 identity) */
  double ek = 0, ek2 = 0;
  for (size_t i = 0; i < n; i++)
    ek += p[i];
  for (size_t k = 0; k < 16; k++)
    ek2 += (double)k * pk[k];
  ck_assert_double_eq_tol(ek, ek2, 1e-9);
  ck_assert_double_eq_tol(twofold_changes_count_mean(ch), ek, 1e-12);
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}

START_TEST(level_equals_enumeration) {
  double y[14];
  sim_series(y, 14, 11, 3, 12, 6, 0, 0);
  check_against_brute(TWOFOLD_CP_LEVEL, y, 14, 1, 1, 0.2, 0, 1, 0);
  check_against_brute(TWOFOLD_CP_LEVEL, y, 14, 2, 2, 0.1, 0, 1, 0);
  check_against_brute(TWOFOLD_CP_LEVEL, y, 14, 3, 3, 0.05, 0, 1, 1e-10);
  y[4] = NAN; /* a missing day */
  y[9] = NAN;
  check_against_brute(TWOFOLD_CP_LEVEL, y, 14, 1, 2, 0.2, 0, 2, 0);
  sim_series(y, 14, 12, 20, 20, 14, 0, 0); /* no change */
  check_against_brute(TWOFOLD_CP_LEVEL, y, 14, 1, 1, 0.3, 0, 1, 0);
}
END_TEST

START_TEST(jump_equals_enumeration) {
  double y[14];
  sim_series(y, 14, 21, 5, 40, 7, 0.1, -0.1);
  check_against_brute(TWOFOLD_CP_JUMP, y, 14, 1, 1, 0.2, 0, 1, 0);
  check_against_brute(TWOFOLD_CP_JUMP, y, 14, 3, 2, 0.1, 1, 1, 0);
  y[2] = NAN;
  y[3] = NAN;
  y[11] = NAN;
  check_against_brute(TWOFOLD_CP_JUMP, y, 14, 2, 2, 0.1, 1, 1.5, 1e-10);
  sim_series(y, 14, 22, 0.5, 0.5, 14, 0, 0); /* sparse counts, zeros */
  check_against_brute(TWOFOLD_CP_JUMP, y, 14, 1, 1, 0.2, 0, 1, 0);
}
END_TEST

/* ---- segment marginals against independent formulas -------------------- */

/* Level segment, Poisson-gamma conjugacy (Gelman et al. 2013, Bayesian
 * Data Analysis, 3rd ed., sec. 2.6): p(y) = beta^a Gamma(a+Y) /
 * (Gamma(a) (beta+L)^(a+Y) prod y!); the library leaves out prod y!. */
START_TEST(level_marginal_conjugate) {
  double y[10] = {3, 0, 5, 2, 7, 1, 4, 4, 0, 2};
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  twofold_cp_options_set_kind(o, TWOFOLD_CP_LEVEL);
  twofold_cp_options_set_weekday(o, 0);
  twofold_cp_options_set_dispersion(o, 1);
  twofold_cp_options_set_min_segment(o, 1);
  twofold_cp_options_set_level_prior(o, 2.5, 0.75);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 10, 1), 0);
  for (size_t s = 0; s < 10; s++)
    for (size_t e = s; e < 10; e++) {
      double Y = 0, L = (double)(e - s + 1);
      for (size_t t = s; t <= e; t++)
        Y += y[t];
      double ref = 2.5 * log(0.75) + gsl_sf_lngamma(2.5 + Y) -
                   gsl_sf_lngamma(2.5) - (2.5 + Y) * log(0.75 + L);
      double got;
      ck_assert_int_eq(twofold_changes_segment_logml(ch, s, e, &got), 0);
      ck_assert_double_eq_tol(got, ref, 1e-11);
    }
  /* evidence: the single-segment prior (one segment, no change) is part of
   * the enumeration above; here the full value with prod y! */
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}
END_TEST

/* Jump segment: the Laplace step in b against adaptive quadrature (GSL
 * QAG, Piessens et al. 1983, QUADPACK) of the level-integrated likelihood
 * b -> exp(b S1 + log Gamma(a+Y) - (a+Y) log(beta + E0(b)) + log N(b)). */
typedef struct {
  const double *y;
  size_t s, e;
  double a, beta, mu, sd, shift;
} jq_t;

static double jq_f(double b, void *p) {
  const jq_t *q = p;
  double c = 0.5 * ((double)q->s + (double)q->e), Y = 0, S1 = 0, E0 = 0;
  for (size_t t = q->s; t <= q->e; t++) {
    Y += q->y[t];
    S1 += ((double)t - c) * q->y[t];
    E0 += exp(b * ((double)t - c));
  }
  double z = (b - q->mu) / q->sd;
  return exp(b * S1 + q->a * log(q->beta) - lgamma(q->a) + lgamma(q->a + Y) -
             (q->a + Y) * log(q->beta + E0) - 0.5 * z * z - log(q->sd) -
             0.5 * log(2 * M_PI) - q->shift);
}

START_TEST(jump_marginal_quadrature) {
  double y[40];
  sim_series(y, 40, 5, 20, 20, 40, 0.03, 0);
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  twofold_cp_options_set_kind(o, TWOFOLD_CP_JUMP);
  twofold_cp_options_set_weekday(o, 0);
  twofold_cp_options_set_dispersion(o, 1);
  twofold_cp_options_set_level_prior(o, 1, 0.05);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 40, 1), 0);
  gsl_integration_workspace *w = gsl_integration_workspace_alloc(1000);
  size_t segs[][2] = {{0, 39}, {0, 9}, {10, 37}, {5, 5}, {20, 26}};
  double maxerr = 0;
  for (size_t i = 0; i < 5; i++) {
    double got;
    ck_assert_int_eq(
        twofold_changes_segment_logml(ch, segs[i][0], segs[i][1], &got), 0);
    jq_t q = {y, segs[i][0], segs[i][1], 1, 0.05, 0, 0.1, got};
    gsl_function F = {jq_f, &q};
    double res, err;
    ck_assert_int_eq(gsl_integration_qag(&F, -1, 1, 0, 1e-10, 1000, 6, w,
                                         &res, &err),
                     0);
    double d = fabs(log(res));
    maxerr = fmax(maxerr, d);
    /* Laplace error: METHODS B5 reports 1.5e-4 on a 28-day segment */
    ck_assert_msg(d < 5e-3, "segment %zu-%zu: Laplace error %g", segs[i][0],
                  segs[i][1], d);
  }
  printf("jump segment Laplace error (max |log ratio| vs QAG): %.2e\n",
         maxerr);
  gsl_integration_workspace_free(w);
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}
END_TEST

/* Length prior against GSL's negative binomial (gsl_ran_negative_binomial
 * counts failures before the k-th success). */
START_TEST(length_prior_negbin) {
  double y[200];
  for (size_t i = 0; i < 200; i++)
    y[i] = 5;
  int ms[] = {1, 7, 3}, ks[] = {1, 2, 4};
  double means[] = {30, 60, 12};
  for (int c = 0; c < 3; c++) {
    twofold_cp_options *o;
    twofold_cp_options_new(&o);
    twofold_cp_options_set_kind(o, TWOFOLD_CP_LEVEL);
    ck_assert_int_eq(twofold_cp_options_set_change_prob(o, 1 / means[c]), 0);
    ck_assert_int_eq(twofold_cp_options_set_min_segment(o, ms[c]), 0);
    twofold_cp_options_set_length_shape(o, ks[c]);
    twofold_changes *ch;
    twofold_changes_new(&ch);
    ck_assert_int_eq(twofold_changes_run(ch, o, y, 200, 1), 0);
    double q = ks[c] / (means[c] - ms[c] + ks[c]);
    double sum0 = 0;
    for (size_t l = 1; l <= 200; l++) {
      double lp, ls, lp0, ls0;
      twofold_changes_length_prior(ch, l, 0, &lp, &ls);
      twofold_changes_length_prior(ch, l, 1, &lp0, &ls0);
      double ref = l < (size_t)ms[c]
                       ? 0
                       : gsl_ran_negative_binomial_pdf(
                             (unsigned)(l - (size_t)ms[c]), q, ks[c]);
      double refS = l - 1 < (size_t)ms[c]
                        ? 1
                        : gsl_cdf_negative_binomial_Q(
                              (unsigned)(l - 1 - (size_t)ms[c]), q, ks[c]);
      ck_assert_double_eq_tol(exp(lp), ref, 1e-12);
      ck_assert_double_eq_tol(exp(ls), refS, 1e-12);
      /* stationary first segment g0(l) = P(L >= l) / mean (Cox 1962,
       * Renewal Theory, sec. 2.2) */
      ck_assert_double_eq_tol(exp(lp0), refS / means[c], 1e-12);
      sum0 += exp(lp0);
      ck_assert_double_eq_tol(exp(ls0), 1 - sum0 + exp(lp0), 1e-9);
    }
    twofold_changes_free(ch);
    twofold_cp_options_free(o);
  }
}
END_TEST

/* ---- pruning against the unpruned recursion ------------------------------ */

START_TEST(pruning_error) {
  size_t n = 400;
  double *y = malloc(n * sizeof(double));
  sim_series(y, n, 77, 30, 60, 200, 0.01, -0.01);
  double *p0 = malloc(n * sizeof(double)), *p1 = malloc(n * sizeof(double));
  double *g0 = malloc(n * sizeof(double)), *g1 = malloc(n * sizeof(double));
  for (int kind = 1; kind <= 2; kind++) {
    twofold_cp_options *o;
    twofold_cp_options_new(&o);
    twofold_cp_options_set_kind(o, kind);
    twofold_changes *a, *b;
    twofold_changes_new(&a);
    twofold_changes_new(&b);
    twofold_cp_options_set_prune(o, 0);
    ck_assert_int_eq(twofold_changes_run(a, o, y, n, 1), 0);
    twofold_cp_options_set_prune(o, 1e-10);
    ck_assert_int_eq(twofold_changes_run(b, o, y, n, 1), 0);
    twofold_changes_p_change(a, p0);
    twofold_changes_p_change(b, p1);
    twofold_changes_growth(a, g0, NULL, NULL);
    twofold_changes_growth(b, g1, NULL, NULL);
    double dp = 0, dg = 0;
    for (size_t i = 0; i < n; i++) {
      dp = fmax(dp, fabs(p0[i] - p1[i]));
      dg = fmax(dg, fabs(g0[i] - g1[i]));
    }
    double dz = fabs(twofold_changes_log_evidence(a) -
                     twofold_changes_log_evidence(b));
    printf("pruning 1e-10, %s, n=%zu: max |dp| %.2e, max |dgrowth| %.2e, "
           "|dlogZ| %.2e\n",
           twofold_cp_kind_to_string(kind), n, dp, dg, dz);
    ck_assert_double_lt(dp, 1e-6);
    ck_assert_double_lt(dg, 1e-6);
    ck_assert_double_lt(dz, 1e-6);
    twofold_changes_free(a);
    twofold_changes_free(b);
    twofold_cp_options_free(o);
  }
  free(y);
  free(p0);
  free(p1);
  free(g0);
  free(g1);
}
END_TEST


/* ---- KINK against enumeration and fine quadrature ------------------------
 * The exact target: for every segmentation, the integral over the knot
 * levels of prod(segment Poisson likelihood x N(b) density) x N(first knot),
 * by the trapezoid rule on a fixed fine grid (241 points over +-3 around
 * the log mean count), iterated along the chain of knots (each knot is
 * shared by two segments only).  The library's pilot-centred lattice must
 * agree to the printed error. */
#define KM 241
static double kink_seg_ll(const double *y, size_t s, size_t e, double x0,
                          double x1) {
  double L = (double)(e - s + 1), b = (x1 - x0) / L, ll = 0;
  for (size_t t = s; t <= e; t++) {
    double eta = x0 + b * (double)(t - s + 1);
    ll += y[t] * eta - exp(eta) - lgamma(y[t] + 1);
  }
  double z = b / 0.1;
  return ll - 0.5 * z * z - log(0.1) - 0.5 * log(2 * M_PI) - log(L);
}

START_TEST(kink_against_quadrature) {
  enum { N = 9 };
  double y[N] = {12, 15, 14, 19, 25, 22, 20, 15, 12};
  double alpha = 2, beta = 2.0 / 17;
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  twofold_cp_options_set_kind(o, TWOFOLD_CP_KINK);
  twofold_cp_options_set_weekday(o, 0);
  twofold_cp_options_set_dispersion(o, 1);
  twofold_cp_options_set_level_prior(o, alpha, beta);
  twofold_cp_options_set_change_prob(o, 0.2);
  twofold_cp_options_set_min_segment(o, 2);
  twofold_cp_options_set_length_shape(o, 1);
  twofold_cp_options_set_prune(o, 0);
  twofold_cp_options_set_max_changes(o, 8);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, N, 1), 0);
  /* fine grid */
  double xs[KM], lo = log(17) - 3, hx = 6.0 / (KM - 1);
  for (int i = 0; i < KM; i++)
    xs[i] = lo + hx * i;
  double mu0 = gsl_sf_psi(alpha) - log(beta), sd0 = sqrt(gsl_sf_psi_1(alpha));
  static double M[N][N][KM][KM];
  for (size_t s = 0; s < N; s++)
    for (size_t e = s; e < N; e++)
      for (int i = 0; i < KM; i++)
        for (int j = 0; j < KM; j++)
          M[s][e][i][j] = kink_seg_ll(y, s, e, xs[i], xs[j]);
  double lg[N + 1], lS[N + 1], lg0[N + 1], lS0[N + 1];
  for (size_t l = 1; l <= N; l++) {
    twofold_changes_length_prior(ch, l, 0, &lg[l], &lS[l]);
    twofold_changes_length_prior(ch, l, 1, &lg0[l], &lS0[l]);
  }
  size_t ns = (size_t)1 << (N - 1);
  double lw[1 << (N - 1)], Z = -INFINITY;
  for (size_t m = 0; m < ns; m++) {
    double v[KM], nv[KM], w = 0;
    for (int i = 0; i < KM; i++) {
      double z = (xs[i] - mu0) / sd0;
      v[i] = -0.5 * z * z - log(sd0) - 0.5 * log(2 * M_PI) + log(hx) -
             (i == 0 || i == KM - 1 ? log(2) : 0);
    }
    size_t s = 0;
    for (size_t e = 0; e < N; e++) {
      int end = e + 1 == N || ((m >> e) & 1);
      if (!end)
        continue;
      size_t L = e - s + 1;
      w += e + 1 == N ? (s == 0 ? lS0[L] : lS[L]) : (s == 0 ? lg0[L] : lg[L]);
      for (int j = 0; j < KM; j++) {
        double acc = -INFINITY;
        for (int i = 0; i < KM; i++)
          acc = lse2(acc, v[i] + M[s][e][i][j]);
        nv[j] = acc + log(hx) - (j == 0 || j == KM - 1 ? log(2) : 0);
      }
      memcpy(v, nv, sizeof v);
      s = e + 1;
    }
    double t = -INFINITY;
    for (int i = 0; i < KM; i++)
      t = lse2(t, v[i]);
    lw[m] = w + t;
    Z = lse2(Z, lw[m]);
  }
  double pch[N] = {0}, pk[N] = {0};
  for (size_t m = 0; m < ns; m++) {
    double p = exp(lw[m] - Z);
    int k = 0;
    for (size_t g = 0; g + 1 < N; g++)
      if ((m >> g) & 1) {
        pch[g + 1] += p;
        k++;
      }
    pk[k] += p;
  }
  /* the default (Laplace messages), then the grid method on 16 and 48
   * points.  Tolerances: the default's errors measured 2.2e-3, 3.6e-3 and
   * 1.9e-3 when written (Laplace and collapsing errors on 9 days of about
   * 17 a day; both shrink with the counts), the grid's about 1e-5 (the
   * reference quadrature's own error is of that order). */
  static const int grid[3] = {0, 16, 48};
  static const double tol[3][3] = {
      {5e-3, 1e-2, 5e-3}, {1e-4, 1e-4, 1e-4}, {1e-4, 1e-4, 1e-4}};
  for (int m = 0; m < 3; m++) {
    ck_assert_int_eq(twofold_cp_options_set_grid(o, grid[m]), 0);
    ck_assert_int_eq(twofold_changes_run(ch, o, y, N, 1), 0);
    double p[N], q[9];
    twofold_changes_p_change(ch, p);
    twofold_changes_count_prob(ch, q, 9, NULL);
    double dp = 0, dk = 0;
    for (size_t i = 0; i < N; i++) {
      dp = fmax(dp, fabs(p[i] - pch[i]));
      dk = fmax(dk, fabs(q[i] - pk[i]));
    }
    double dz = fabs(twofold_changes_log_evidence(ch) - Z);
    printf("kink %s%d vs enumeration + quadrature, n=%d: max |dp| %.2e, "
           "max |dP(K)| %.2e, |dlogZ| %.2e\n",
           grid[m] ? "grid, points " : "Laplace messages, grid ", grid[m],
           N, dp, dk, dz);
    fflush(stdout);
    ck_assert_double_lt(dp, tol[m][0]);
    ck_assert_double_lt(dk, tol[m][1]);
    ck_assert_double_lt(dz, tol[m][2]);
  }
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}
END_TEST

/* ---- online filter -------------------------------------------------------
 * Without resampling the filter is exact: the sum of its one-step log
 * predictives is log p(y), the offline evidence (Fearnhead & Liu 2007,
 * sec. 2; METHODS A5), and P(a new regime within the last k days) equals
 * the enumeration over segmentations. */
START_TEST(online_exact_without_resampling) {
  double y[14];
  sim_series(y, 14, 31, 4, 15, 8, 0, 0);
  y[5] = NAN;
  for (int kind = 1; kind <= 2; kind++) {
    twofold_cp_options *o;
    twofold_cp_options_new(&o);
    twofold_cp_options_set_kind(o, kind);
    twofold_cp_options_set_weekday(o, 0);
    twofold_cp_options_set_dispersion(o, 1);
    twofold_cp_options_set_level_prior(o, 1, 0.1);
    twofold_cp_options_set_min_segment(o, 2);
    twofold_cp_options_set_change_prob(o, 0.15);
    twofold_changes *ch;
    twofold_changes_new(&ch);
    ck_assert_int_eq(twofold_changes_run(ch, o, y, 14, 2), 0);
    twofold_online *on;
    ck_assert_int_eq(twofold_online_new(o, NULL, 0, 2, 100, 1, &on), 0);
    double sum = 0;
    for (size_t t = 0; t < 14; t++) {
      ck_assert_int_eq(twofold_online_add(on, y[t]), 0);
      sum += twofold_online_log_predictive(on);
    }
    ck_assert_double_eq_tol(sum, twofold_changes_log_evidence(ch), 1e-9);
    /* enumeration of P(last segment starts after day 14-k) */
    double lml[14][14];
    for (size_t s = 0; s < 14; s++)
      for (size_t e = s; e < 14; e++)
        twofold_changes_segment_logml(ch, s, e, &lml[s][e]);
    double Z = -INFINITY, lastw[14];
    for (int i = 0; i < 14; i++)
      lastw[i] = -INFINITY;
    for (size_t m = 0; m < (1u << 13); m++) {
      double w = 0;
      size_t s = 0;
      for (size_t e = 0; e < 14; e++) {
        if (!(e == 13 || ((m >> e) & 1)))
          continue;
        double lp, ls;
        twofold_changes_length_prior(ch, e - s + 1, s == 0, &lp, &ls);
        w += lml[s][e] + (e == 13 ? ls : lp);
        if (e == 13)
          lastw[s] = lse2(lastw[s], w);
        s = e + 1;
      }
      Z = lse2(Z, w);
    }
    for (size_t kk = 1; kk <= 6; kk++) {
      double ref = 0, got;
      for (size_t s = 14 - kk; s < 14; s++)
        ref += exp(lastw[s] - Z);
      ck_assert_int_eq(twofold_online_p_recent(on, kk, &got), 0);
      ck_assert_double_eq_tol(got, ref, 1e-9);
    }
    double m, lo, hi;
    ck_assert_int_eq(twofold_online_growth(on, &m, &lo, &hi), 0);
    ck_assert(lo <= m && m <= hi);
    twofold_online_free(on);
    twofold_changes_free(ch);
    twofold_cp_options_free(o);
  }
}
END_TEST

/* KINK online without resampling against the offline run with pruning off
 * (both use the collapsed Laplace messages, so they must agree to
 * rounding): the sum of the one-step log predictives is the log evidence,
 * and with segments of at least 7 days P(a change within the last k <= 7
 * days) is the sum of the offline P(change) over those days (at most one
 * change fits in them).  Identity of the recursions (METHODS A4). */
START_TEST(online_kink_equals_offline) {
  enum { N = 80 };
  double y[N];
  sim_series(y, N, 57, 40, 40 * exp(0.03 * 50), 50, 0.03, -0.02);
  y[20] = NAN;
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  ck_assert_int_eq(twofold_cp_options_get_kind(o), TWOFOLD_CP_KINK);
  twofold_cp_options_set_dispersion(o, 1.5);
  twofold_cp_options_set_weekday(o, 0);
  twofold_cp_options_set_level_prior(o, 1, 0.02);
  twofold_cp_options_set_prune(o, 0);
  twofold_cp_options_set_clean(o, 0);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, N, 3), 0);
  double p[N];
  twofold_changes_p_change(ch, p);
  twofold_online *on;
  ck_assert_int_eq(twofold_online_new(o, NULL, 0, 3, 1000, 1, &on), 0);
  double sum = 0;
  for (size_t t = 0; t < N; t++) {
    ck_assert_int_eq(twofold_online_add(on, y[t]), 0);
    sum += twofold_online_log_predictive(on);
  }
  double ev = twofold_changes_log_evidence(ch);
  printf("online kink, no resampling: sum of log predictives %.10f, "
         "offline log evidence %.10f\n",
         sum, ev);
  fflush(stdout);
  ck_assert_double_eq_tol(sum, ev, 1e-8);
  double ref = 0;
  for (size_t k = 1; k <= 7; k++) {
    ref += p[N - k];
    double got;
    ck_assert_int_eq(twofold_online_p_recent(on, k, &got), 0);
    ck_assert_double_eq_tol(got, ref, 1e-9);
  }
  double m, lo, hi;
  ck_assert_int_eq(twofold_online_growth(on, &m, &lo, &hi), 0);
  ck_assert(lo <= m && m <= hi);
  /* the truth: -0.02 a day in the last segment */
  ck_assert(lo <= -0.02 && -0.02 <= hi);
  twofold_online_free(on);
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}
END_TEST

/* Candidates whose weights underflow to 0 must not stop the resampling
 * (a regression: with more zero weights than the cap allows, SOR's alpha
 * came out as 0, every candidate was kept and the filter never returned).
 * District 29 of the benchmark generator (bench/benchgen.c, invented
 * data), with 365 days of history and 100 candidates, hit it on day 611
 * with jump segments; every add must return with at most the cap. */
START_TEST(online_zero_weights) {
  enum { N = 730, CAP = 100 };
  static double y[N];
  ck_assert_int_eq(benchgen_region(28, N, y, NULL), 0);
  for (int kind = 0; kind < 3; kind++) {
    twofold_cp_options *o;
    twofold_cp_options_new(&o);
    twofold_cp_options_set_kind(o, kind);
    twofold_online *on;
    ck_assert_int_eq(twofold_online_new(o, y, 365, BENCHGEN_FIRST_WEEKDAY, CAP, 1, &on),
                     0);
    for (int t = 365; t < N; t++) {
      ck_assert_int_eq(twofold_online_add(on, y[t]), 0);
      ck_assert_uint_le(twofold_online_candidates(on), CAP);
    }
    double p;
    ck_assert_int_eq(twofold_online_p_recent(on, 5, &p), 0);
    ck_assert(p >= 0 && p <= 1);
    twofold_online_free(on);
    twofold_cp_options_free(o);
  }
}
END_TEST

/* With few candidates (stratified optimal resampling) the evidence stays
 * close to the exact one; printed, held to a loose bound. */
START_TEST(online_resampling) {
  size_t n = 300;
  double *y = malloc(n * sizeof(double));
  sim_series(y, n, 41, 30, 80, 150, 0.01, -0.02);
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  twofold_cp_options_set_kind(o, TWOFOLD_CP_JUMP);
  twofold_cp_options_set_dispersion(o, 1);
  twofold_cp_options_set_weekday(o, 0);
  twofold_cp_options_set_level_prior(o, 1, 0.02);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, n, 1), 0);
  double exact = twofold_changes_log_evidence(ch);
  size_t caps[] = {20, 50};
  for (int c = 0; c < 2; c++) {
    twofold_online *on;
    ck_assert_int_eq(twofold_online_new(o, NULL, 0, 1, caps[c], 7, &on), 0);
    double sum = 0;
    for (size_t t = 0; t < n; t++) {
      ck_assert_int_eq(twofold_online_add(on, y[t]), 0);
      sum += twofold_online_log_predictive(on);
      ck_assert_uint_le(twofold_online_candidates(on), caps[c]);
    }
    printf("online, %zu candidates: log evidence error %.2e\n", caps[c],
           sum - exact);
    ck_assert_double_lt(fabs(sum - exact), 0.5);
    double p;
    ck_assert_int_eq(twofold_online_p_recent(on, 7, &p), 0);
    ck_assert(p >= 0 && p <= 1);
    twofold_online_free(on);
  }
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
  free(y);
}
END_TEST

/* A series whose weights concentrate on one candidate after a sharp
 * break (invented numbers: growth 1 %/day from 500 a day, then a fall of
 * 3 %/day, with a fixed-seed LCG for the noise).  Stratified optimal
 * resampling keeps m of the candidates (Fearnhead & Liu 2007, JRSS B
 * 69:589-605, sec. 3; METHODS A4): the filter must finish, stay within
 * the cap after every day (Check's time limit fails a filter that loops)
 * and give finite predictives. */
START_TEST(online_resampling_dominant) {
  enum { DN = 500 };
  double y[DN];
  unsigned long long x = 12345;
  for (int t = 0; t < DN; t++) {
    x = x * 6364136223846793005ULL + 1442695040888963407ULL;
    double u = (double)(x >> 11) / 9007199254740992.0;
    double mu = t < 300 ? 500 * exp(0.01 * t)
                        : 500 * exp(3.0 - 0.03 * (t - 300));
    y[t] = floor(mu + sqrt(mu) * (u - 0.5) * 3.4);
  }
  for (int kind = TWOFOLD_CP_JUMP; kind <= TWOFOLD_CP_LEVEL; kind++) {
    twofold_cp_options *o;
    twofold_cp_options_new(&o);
    twofold_cp_options_set_kind(o, kind);
    size_t caps[] = {4, 20, 100};
    for (int c = 0; c < 3; c++) {
      twofold_online *on;
      ck_assert_int_eq(twofold_online_new(o, y, 100, 1, caps[c], 7, &on), 0);
      for (size_t t = 100; t < DN; t++) {
        ck_assert_int_eq(twofold_online_add(on, y[t]), 0);
        ck_assert_uint_le(twofold_online_candidates(on), caps[c]);
        ck_assert(isfinite(twofold_online_log_predictive(on)));
      }
      double p;
      ck_assert_int_eq(twofold_online_p_recent(on, 7, &p), 0);
      ck_assert(p >= 0 && p <= 1);
      twofold_online_free(on);
    }
    twofold_cp_options_free(o);
  }
}
END_TEST

START_TEST(online_errors) {
  twofold_online *on;
  ck_assert_int_eq(twofold_online_new(NULL, NULL, 0, 1, 10, 1, NULL),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_online_new(NULL, NULL, 0, 0, 10, 1, &on),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_online_new(NULL, NULL, 0, 1, 1, 1, &on),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_online_new(NULL, NULL, 5, 1, 10, 1, &on),
                   TWOFOLD_EINVAL);
  double bad[3] = {1, -2, 3};
  ck_assert_int_eq(twofold_online_new(NULL, bad, 3, 1, 10, 1, &on),
                   TWOFOLD_ECOUNT);
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  ck_assert_int_eq(twofold_online_new(o, NULL, 0, 1, 1, 1, &on),
                   TWOFOLD_EINVAL); /* fewer than 2 candidates */
  twofold_cp_options_free(o);
  ck_assert_int_eq(twofold_online_new(NULL, NULL, 0, 1, 10, 1, &on), 0);
  double p;
  ck_assert_int_eq(twofold_online_p_recent(on, 1, &p), TWOFOLD_ENODATA);
  ck_assert_int_eq(twofold_online_growth(on, &p, NULL, NULL),
                   TWOFOLD_ENODATA);
  ck_assert(isnan(twofold_online_log_predictive(on)));
  ck_assert_int_eq(twofold_online_add(on, 1.5), TWOFOLD_ECOUNT);
  ck_assert(strstr(twofold_online_errmsg(on), "count") != NULL);
  ck_assert_int_eq(twofold_online_add(NULL, 1), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_online_add(on, 3), 0);
  ck_assert_int_eq(twofold_online_p_recent(on, 0, &p), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_online_p_recent(on, 1, NULL), TWOFOLD_EINVAL);
  ck_assert_uint_eq(twofold_online_days(on), 1);
  ck_assert_uint_eq(twofold_online_days(NULL), 0);
  twofold_online_free(on);
}
END_TEST

/* ---- British coal-mining disasters -----------------------------------------
 * Annual counts 1851-1962 derived live from R's boot::coal (Jarrett 1979,
 * Biometrika 66:191-193; 191 disasters).  Single change in a constant
 * rate: posterior mode of the last high-rate year at 1890 or 1891 (Carlin,
 * Gelfand & Smith 1992, Applied Statistics 41:389-405; Raftery & Akman
 * 1986, Biometrika 73:85-89); rates about 3.1 and 0.9 per year. */
START_TEST(coal_mining) {
  const char *rs = getenv("RSCRIPT");
  if (!rs || !*rs)
    rs = "Rscript";
  char cmd[1024];
  snprintf(cmd, sizeof cmd,
           "'%s' -e 'suppressMessages(library(boot)); "
           "cat(tabulate(floor(coal$date) - 1850, nbins = 112))' 2>&1",
           rs);
  FILE *f = popen(cmd, "r");
  ck_assert_msg(f != NULL, "FAIL: cannot run Rscript (%s)", rs);
  double y[112];
  size_t n = 0;
  double v, tot = 0;
  while (n < 112 && fscanf(f, "%lf", &v) == 1) {
    y[n++] = v;
    tot += v;
  }
  int st = pclose(f);
  ck_assert_msg(st == 0 && n == 112,
                "FAIL: Rscript with the boot package is required (Debian "
                "r-base-core, r-cran-boot); got %zu values, status %d",
                n, st);
  ck_assert_double_eq(tot, 191);
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  twofold_cp_options_set_kind(o, TWOFOLD_CP_LEVEL);
  twofold_cp_options_set_weekday(o, 0);
  twofold_cp_options_set_dispersion(o, 1);
  twofold_cp_options_set_min_segment(o, 1);
  twofold_cp_options_set_length_shape(o, 1);
  twofold_cp_options_set_change_prob(o, 1.0 / 112);
  twofold_cp_options_set_clean(o, 0); /* reference data: no artefacts */
  twofold_changes *ch;
  twofold_changes_new(&ch);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 112, 1), 0);
  /* single change: P(tau | K = 1, y) from the segment marginals */
  int best = -1;
  double bw = -INFINITY;
  for (size_t tau = 0; tau + 1 < 112; tau++) {
    double a, b;
    twofold_changes_segment_logml(ch, 0, tau, &a);
    twofold_changes_segment_logml(ch, tau + 1, 111, &b);
    if (a + b > bw) {
      bw = a + b;
      best = (int)tau;
    }
  }
  printf("coal: single-change mode, last high-rate year %d\n", 1851 + best);
  fflush(stdout);
  ck_assert(1851 + best == 1890 || 1851 + best == 1891);
  /* the recursions: the change falls in 1886..1896 */
  double p[112], near = 0;
  twofold_changes_p_change(ch, p);
  for (size_t i = 1886 - 1851; i <= 1896 - 1851; i++)
    near += p[i];
  double pk[3];
  twofold_changes_count_prob(ch, pk, 3, NULL);
  printf("coal: P(a change in 1886-1896) %.3f, P(K=1) %.3f, P(K=2) %.3f, "
         "MAP changes %zu\n",
         near, pk[1], pk[2], twofold_changes_map_count(ch));
  fflush(stdout);
  ck_assert_double_gt(near, 0.9);
  ck_assert_uint_ge(twofold_changes_map_count(ch), 1);
  size_t day, from, to;
  double prob, l0, l1;
  twofold_changes_map_change(ch, 0, &day, &from, &to, &prob);
  twofold_changes_map_segment(ch, 0, NULL, NULL, NULL, NULL, NULL, &l0);
  twofold_changes_map_segment(ch, 1, NULL, NULL, NULL, NULL, NULL, &l1);
  printf("coal: MAP change %zu [%zu, %zu] p %.2f, rates %.2f and %.2f\n",
         1851 + day, 1851 + from, 1851 + to, prob, l0, l1);
  fflush(stdout);
  ck_assert(1851 + day == 1891 || 1851 + day == 1892);
  ck_assert_double_eq_tol(l0, 3.1, 0.2);
  ck_assert_double_eq_tol(l1, 0.9, 0.15);
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}
END_TEST

/* ---- errors and NULL safety ------------------------------------------------ */

START_TEST(errors_and_null) {
  twofold_cp_options *o;
  ck_assert_int_eq(twofold_cp_options_new(NULL), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_cp_options_new(&o), 0);
  twofold_cp_options_free(NULL);
  twofold_changes_free(NULL);
  twofold_online_free(NULL);
  ck_assert_int_eq(twofold_cp_options_set_kind(NULL, 0), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_cp_options_set_kind(o, 3), TWOFOLD_EINVAL);
  ck_assert(strstr(twofold_cp_options_errmsg(o), "unknown") != NULL);
  ck_assert_int_eq(twofold_cp_options_set_change_prob(o, 0), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_change_prob(o, 0.5),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_changes_per_year(o, -1),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_changes_per_year(o, NAN),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_min_segment(o, 0), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_min_segment(o, 200),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_length_shape(o, 0), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_rate_prior(o, 0, 0), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_rate_prior(o, INFINITY, 1),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_level_prior(o, 0, 1),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_level_prior(o, 1, -1),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_dispersion(o, 0.5), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_weekday(o, 2), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_cp_options_set_prune(o, 0.1), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_max_changes(o, -1), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_level(o, 1), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_set_grid(o, 3), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_cp_options_get_grid(NULL), 0);
  ck_assert_int_eq(twofold_cp_options_get_rate_prior(NULL, NULL, NULL),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_cp_options_copy(NULL, &o), TWOFOLD_EINVAL);
  /* enums */
  ck_assert_str_eq(twofold_cp_kind_to_string(TWOFOLD_CP_KINK), "kink");
  ck_assert_str_eq(twofold_cp_kind_to_string(TWOFOLD_CP_JUMP), "jump");
  ck_assert_str_eq(twofold_cp_kind_to_string(TWOFOLD_CP_LEVEL), "level");
  ck_assert_ptr_null(twofold_cp_kind_to_string(7));
  ck_assert_int_eq(twofold_cp_kind_from_string("level"), TWOFOLD_CP_LEVEL);
  ck_assert_int_eq(twofold_cp_kind_from_string("Level"), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_cp_kind_from_string(NULL), TWOFOLD_EINVAL);
  /* runs */
  twofold_changes *ch;
  ck_assert_int_eq(twofold_changes_new(NULL), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_changes_new(&ch), 0);
  double y[10] = {1, 2, 3, 4, 5, 6, 7, 8, 9, 10};
  double p[10];
  ck_assert_int_eq(twofold_changes_p_change(ch, p), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_changes_run(NULL, o, y, 10, 1), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_changes_run(ch, o, NULL, 10, 1), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 10, 0), TWOFOLD_EINVAL);
  ck_assert(strstr(twofold_changes_errmsg(ch), "weekday") != NULL);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 10, 8), TWOFOLD_EINVAL);
  y[3] = -1;
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 10, 1), TWOFOLD_ECOUNT);
  ck_assert(strstr(twofold_changes_errmsg(ch), "day 3") != NULL);
  y[3] = 2.5;
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 10, 1), TWOFOLD_ECOUNT);
  y[3] = INFINITY;
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 10, 1), TWOFOLD_ECOUNT);
  ck_assert_int_eq(twofold_changes_status(ch), TWOFOLD_ECOUNT);
  double none[3] = {NAN, 4, NAN};
  ck_assert_int_eq(twofold_changes_run(ch, o, none, 3, 1), TWOFOLD_ENODATA);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 0, 1), TWOFOLD_ENODATA);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, TWOFOLD_CP_MAX_DAYS + 1, 1),
                   TWOFOLD_ETOOLARGE);
  ck_assert_uint_eq(twofold_changes_length(ch), 0);
  ck_assert(isnan(twofold_changes_log_evidence(ch)));
  ck_assert(isnan(twofold_changes_dispersion(ch)));
  ck_assert_uint_eq(twofold_changes_map_count(NULL), 0);
  ck_assert_int_eq(twofold_changes_sample(ch, 1, 1, NULL, NULL, NULL),
                   TWOFOLD_EINVAL);
  y[3] = 4;
  twofold_cp_options_set_kind(o, TWOFOLD_CP_LEVEL);
  ck_assert_int_eq(twofold_changes_run(ch, NULL, y, 10, 1), 0); /* defaults */
  ck_assert_int_eq(twofold_changes_kind(ch), TWOFOLD_CP_KINK);
  ck_assert_int_eq(twofold_changes_run(ch, o, y, 10, 1), 0);
  ck_assert_uint_eq(twofold_changes_length(ch), 10);
  ck_assert_str_eq(twofold_changes_errmsg(ch), "");
  double pk[30];
  ck_assert_int_eq(twofold_changes_count_prob(ch, pk, 22, NULL),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_changes_count_prob(ch, NULL, 3, NULL),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(
      twofold_changes_map_change(ch, 99, NULL, NULL, NULL, NULL),
      TWOFOLD_ENOTFOUND);
  ck_assert_int_eq(twofold_changes_map_segment(ch, 99, NULL, NULL, NULL,
                                               NULL, NULL, NULL),
                   TWOFOLD_ENOTFOUND);
  double lm;
  ck_assert_int_eq(twofold_changes_segment_logml(ch, 5, 4, &lm),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_changes_segment_logml(ch, 0, 10, &lm),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_changes_length_prior(ch, 0, 0, NULL, NULL),
                   TWOFOLD_ERANGE);
  ck_assert(isnan(twofold_changes_weekday_effect(ch, 0)));
  /* all arrays NULL is allowed */
  ck_assert_int_eq(twofold_changes_growth(ch, NULL, NULL, NULL), 0);
  ck_assert_int_eq(twofold_changes_doubling(ch, NULL, NULL, NULL, NULL), 0);
  ck_assert_int_eq(twofold_changes_sample(ch, 1, 2, NULL, NULL, NULL), 0);
  /* shrink: the getters keep their values, sampling is refused */
  {
    size_t nn = twofold_changes_length(ch);
    double *p1 = malloc(nn * sizeof *p1), *p2 = malloc(nn * sizeof *p2);
    ck_assert(p1 && p2);
    ck_assert_int_eq(twofold_changes_p_change(ch, p1), 0);
    double ev = twofold_changes_log_evidence(ch);
    size_t km = twofold_changes_map_count(ch);
    ck_assert_int_eq(twofold_changes_shrink(ch), 0);
    ck_assert_int_eq(twofold_changes_p_change(ch, p2), 0);
    ck_assert(memcmp(p1, p2, nn * sizeof *p1) == 0);
    ck_assert(twofold_changes_log_evidence(ch) == ev);
    ck_assert_uint_eq(twofold_changes_map_count(ch), km);
    ck_assert_int_eq(twofold_changes_sample(ch, 1, 2, NULL, NULL, NULL),
                     TWOFOLD_EINVAL);
    ck_assert_int_eq(twofold_changes_shrink(NULL), TWOFOLD_EINVAL);
    free(p1);
    free(p2);
  }
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}
END_TEST

/* ---- KINK on a long, high-count series: Laplace messages vs the grid ----
 * An invented series (Poisson noise, GSL MT19937 seed 20261201): 100 days
 * from 400 a day, growth 0.03 a day, then -0.02 a day from day 50.  The
 * grid method on 48 points per knot (its own error shrinks with the grid;
 * see kink_against_quadrature) is the yardstick; the default method must
 * agree with it to the stated tolerance and both must put the most
 * probable change within 3 days of the true one (common practice for
 * judging a detected date, no source). */
START_TEST(kink_laplace_vs_grid_long) {
  enum { N = 100, T0 = 50 };
  double y[N], eta = log(400);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 20261201);
  for (int t = 0; t < N; t++) {
    eta += t < T0 ? 0.03 : -0.02;
    y[t] = (double)gsl_ran_poisson(r, exp(eta));
  }
  gsl_rng_free(r);
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  double p0[N], p1[N], g0[N], g1[N];
  size_t day[2];
  for (int m = 0; m < 2; m++) {
    ck_assert_int_eq(twofold_cp_options_set_grid(o, m ? 48 : 0), 0);
    twofold_changes *ch;
    twofold_changes_new(&ch);
    ck_assert_int_eq(twofold_changes_run(ch, o, y, N, 1), 0);
    ck_assert_int_eq(twofold_changes_p_change(ch, m ? p1 : p0), 0);
    ck_assert_int_eq(twofold_changes_growth(ch, m ? g1 : g0, NULL, NULL), 0);
    ck_assert_uint_eq(twofold_changes_map_count(ch), 1);
    ck_assert_int_eq(
        twofold_changes_map_change(ch, 0, &day[m], NULL, NULL, NULL), 0);
    twofold_changes_free(ch);
  }
  double dp = 0, dg = 0;
  for (int t = 0; t < N; t++) {
    dp = fmax(dp, fabs(p0[t] - p1[t]));
    dg = fmax(dg, fabs(g0[t] - g1[t]));
  }
  printf("kink Laplace vs grid (48 points), 100 days at 400-1700 a day: max "
         "|dp| %.2e, max |d growth| %.2e /day; changes on days %zu and %zu "
         "(true %d)\n",
         dp, dg, day[0], day[1], (int)T0);
  fflush(stdout);
  ck_assert_double_lt(dp, 0.05);
  ck_assert_double_lt(dg, 0.003);
  for (int m = 0; m < 2; m++)
    ck_assert_uint_le((size_t)labs((long)day[m] - T0), 3);
  twofold_cp_options_free(o);
}
END_TEST

static Suite *changes_suite(void) {
  Suite *s = suite_create("changes");
  TCase *tc = tcase_create("exact");
  tcase_add_test(tc, level_equals_enumeration);
  tcase_add_test(tc, jump_equals_enumeration);
  tcase_add_test(tc, level_marginal_conjugate);
  tcase_add_test(tc, jump_marginal_quadrature);
  tcase_add_test(tc, length_prior_negbin);
  tcase_add_test(tc, pruning_error);
  tcase_set_timeout(tc, 120);
  suite_add_tcase(s, tc);
  tc = tcase_create("kink_online");
  tcase_add_test(tc, kink_against_quadrature);
  tcase_add_test(tc, kink_laplace_vs_grid_long);
  tcase_add_test(tc, online_exact_without_resampling);
  tcase_add_test(tc, online_kink_equals_offline);
  tcase_add_test(tc, online_zero_weights);
  tcase_add_test(tc, online_resampling);
  tcase_add_test(tc, online_resampling_dominant);
  tcase_add_test(tc, online_errors);
  tcase_add_test(tc, coal_mining);
  tcase_set_timeout(tc, 120);
  suite_add_tcase(s, tc);
  tc = tcase_create("api");
  tcase_add_test(tc, errors_and_null);
  suite_add_tcase(s, tc);
  return s;
}

int main(void) {
  SRunner *sr = srunner_create(changes_suite());
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
