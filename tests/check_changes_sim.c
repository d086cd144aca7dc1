/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Simulation checks of the changepoint module: calibration (exact
 * identities and simulation-based calibration), robustness to reporting
 * artefacts, and detection on simulated regional series.  Every series is
 * simulated with GSL's MT19937 generator from a fixed seed.
 */
#include "twofold.h"

#include <check.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- calibration -----------------------------------------------------------
 * Law of total probability (METHODS E5): averaged over series simulated
 * from the prior, the posterior P(K = m | y) is the prior P(K = m) (here
 * Binomial(n-1, p) for the geometric prior, Fearnhead 2006 sec. 2) and the
 * posterior P(change on day t | y) is p.  Simulation-based calibration
 * (Talts et al. 2018, arXiv:1804.06788): the rank of the true value among
 * L = 99 exact posterior draws is uniform on 0..99 (ties randomised);
 * 10 bins, chi-square test at level 0.001.  Untempered (phi = 1), as SBC
 * requires a generative likelihood. */
enum { CN = 30, NREP = 400, LDR = 99 };

static double chisq_p(const int *bins, int nb, int total) {
  double e = (double)total / nb, x = 0;
  for (int i = 0; i < nb; i++)
    x += (bins[i] - e) * (bins[i] - e) / e;
  return gsl_cdf_chisq_Q(x, nb - 1);
}

static int rank_of(double truth, const double *draws, int L, gsl_rng *r) {
  int below = 0, ties = 0;
  for (int i = 0; i < L; i++) {
    if (draws[i] < truth)
      below++;
    else if (draws[i] == truth)
      ties++;
  }
  return below + (int)gsl_rng_uniform_int(r, (unsigned long)ties + 1);
}

static void calibrate(int kind) {
  const double p = 0.1, alpha = 4, beta = 0.4, rsd = 0.1;
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  twofold_cp_options_set_kind(o, kind);
  twofold_cp_options_set_weekday(o, 0);
  twofold_cp_options_set_dispersion(o, 1);
  twofold_cp_options_set_clean(o, 0);
  twofold_cp_options_set_min_segment(o, 1);
  twofold_cp_options_set_length_shape(o, 1);
  twofold_cp_options_set_change_prob(o, p);
  twofold_cp_options_set_level_prior(o, alpha, beta);
  twofold_cp_options_set_rate_prior(o, 0, rsd);
  twofold_cp_options_set_max_changes(o, 29);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 2024 + (unsigned long)kind);
  double avgK[CN] = {0}, avgK2[CN] = {0}, avgp = 0, avgp2 = 0;
  int binK[10] = {0}, binF[10] = {0}, binB[10] = {0};
  unsigned char *chg = malloc((size_t)LDR * CN);
  double *rate = malloc((size_t)LDR * CN * sizeof(double));
  size_t cnt[LDR];
  for (int rep = 0; rep < NREP; rep++) {
    double y[CN], btrue[CN];
    int K = 0, first = CN;
    size_t s = 0;
    while (s < CN) {
      size_t e = s;
      while (e + 1 < CN && gsl_rng_uniform(r) >= p)
        e++;
      double lam = gsl_ran_gamma(r, alpha, 1 / beta);
      double b = kind == TWOFOLD_CP_JUMP ? rsd * gsl_ran_gaussian(r, 1) : 0;
      double c = 0.5 * ((double)s + (double)e);
      for (size_t t = s; t <= e; t++) {
        y[t] = (double)gsl_ran_poisson(r, lam * exp(b * ((double)t - c)));
        btrue[t] = b;
      }
      if (e + 1 < CN) {
        K++;
        if (first == CN)
          first = (int)e + 1;
      }
      s = e + 1;
    }
    ck_assert_int_eq(twofold_changes_run(ch, o, y, CN, 1), 0);
    double pk[CN], pc[CN];
    twofold_changes_count_prob(ch, pk, CN, NULL);
    twofold_changes_p_change(ch, pc);
    for (int m = 0; m < CN; m++) {
      avgK[m] += pk[m] / NREP;
      avgK2[m] += pk[m] * pk[m] / NREP;
    }
    double mp = 0;
    for (int t = 1; t < CN; t++)
      mp += pc[t] / (CN - 1);
    avgp += mp / NREP;
    avgp2 += mp * mp / NREP;
    ck_assert_int_eq(
        twofold_changes_sample(ch, (uint64_t)rep, LDR, chg, rate, cnt), 0);
    double dk[LDR], df[LDR], db[LDR];
    for (int d = 0; d < LDR; d++) {
      dk[d] = (double)cnt[d];
      int f = CN;
      for (int t = 1; t < CN; t++)
        if (chg[d * CN + t]) {
          f = t;
          break;
        }
      df[d] = f;
      db[d] = rate[d * CN + CN / 2];
    }
    binK[rank_of(K, dk, LDR, r) / 10]++;
    binF[rank_of(first, df, LDR, r) / 10]++;
    if (kind == TWOFOLD_CP_JUMP)
      binB[rank_of(btrue[CN / 2], db, LDR, r) / 10]++;
  }
  /* exact identities */
  for (int m = 0; m <= 6; m++) {
    double prior = gsl_ran_binomial_pdf((unsigned)m, p, CN - 1);
    double se = sqrt((avgK2[m] - avgK[m] * avgK[m]) / NREP) + 1e-4;
    printf("%s E5: P(K=%d) averaged %.4f, prior %.4f (SE %.4f)\n",
           twofold_cp_kind_to_string(kind), m, avgK[m], prior, se);
    ck_assert_msg(fabs(avgK[m] - prior) < 4.5 * se,
                  "P(K=%d): %g vs prior %g", m, avgK[m], prior);
  }
  double sep = sqrt((avgp2 - avgp * avgp) / NREP);
  printf("%s E5: mean P(change on a day) %.4f, prior %.4f (SE %.4f)\n",
         twofold_cp_kind_to_string(kind), avgp, p, sep);
  ck_assert(fabs(avgp - p) < 4.5 * sep);
  double pK = chisq_p(binK, 10, NREP), pF = chisq_p(binF, 10, NREP);
  printf("%s SBC chi-square p: K %.3f, first change %.3f", 
         twofold_cp_kind_to_string(kind), pK, pF);
  ck_assert_double_gt(pK, 1e-3);
  ck_assert_double_gt(pF, 1e-3);
  if (kind == TWOFOLD_CP_JUMP) {
    double pB = chisq_p(binB, 10, NREP);
    printf(", growth on day %d %.3f", CN / 2, pB);
    ck_assert_double_gt(pB, 1e-3);
  }
  printf("\n");
  fflush(stdout);
  free(chg);
  free(rate);
  gsl_rng_free(r);
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
}

START_TEST(calibration_level) { calibrate(TWOFOLD_CP_LEVEL); }
END_TEST
START_TEST(calibration_jump) { calibrate(TWOFOLD_CP_JUMP); }
END_TEST

/* ---- simulated regional series ---------------------------------------------
 * log mu_t piecewise linear (continuous), weekday reporting factors
 * (Saturday 0.8, Sunday 0.6 of a weekday, invented), negative binomial
 * noise with theta = 30 (variance mu + mu^2/30): overdispersed as
 * surveillance counts are. */
static const double wk[7] = {1.1, 1.05, 1.0, 1.0, 0.95, 0.8, 0.6};

static void regional(double *y, size_t n, gsl_rng *r, double level,
                     double g1, double g2, size_t cp) {
  double eta = log(level);
  for (size_t t = 0; t < n; t++) {
    if (t > 0)
      eta += t < cp ? g1 : g2;
    double mu = exp(eta) * wk[t % 7];
    double th = 30;
    y[t] = (double)gsl_ran_negative_binomial(r, th / (th + mu), th);
  }
}

static size_t run_map(twofold_changes *ch, const double *y, size_t n,
                      double *pmax) {
  ck_assert_int_eq(twofold_changes_run(ch, NULL, y, n, 1), 0);
  double p[400];
  twofold_changes_p_change(ch, p);
  *pmax = 0;
  for (size_t i = 0; i < n; i++)
    *pmax = fmax(*pmax, p[i]);
  return twofold_changes_map_count(ch);
}

/* Artefacts (METHODS F): a one-day backlog dump, a run of zeros then a
 * catch-up, and a weekday pattern must not become changes in growth
 * (default options: KINK, estimated weekday effects and dispersion,
 * artefact cleaning). */
START_TEST(robust_to_artefacts) {
  enum { N = 140 };
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 99);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  const char *names[] = {"weekday pattern", "backlog spike", "zeros+catch-up"};
  for (int sc = 0; sc < 3; sc++) {
    size_t maxk = 0;
    double maxp = 0;
    for (int rep = 0; rep < 4; rep++) {
      double y[N], pm;
      regional(y, N, r, 100, 0.01, 0.01, N);
      if (sc == 1)
        y[70] *= 5;
      if (sc == 2) {
        double owed = 0;
        for (int t = 60; t < 65; t++) {
          owed += y[t];
          y[t] = 0;
        }
        y[65] += owed;
      }
      size_t k = run_map(ch, y, N, &pm);
      maxk = k > maxk ? k : maxk;
      maxp = fmax(maxp, pm);
    }
    printf("artefact %s: max MAP changes %zu, max P(change) %.3f\n",
           names[sc], maxk, maxp);
    fflush(stdout);
    ck_assert_uint_eq(maxk, 0);
    ck_assert_double_lt(maxp, 0.5);
  }
  twofold_changes_free(ch);
  gsl_rng_free(r);
}
END_TEST

/* Detection: one change in growth (+0.02 to -0.03 per day) on day 75 of
 * 150; share of series with a most-probable change within +-7 days, and
 * false changes per series-year on series without a change (constant
 * growth 0.01).  Thresholds (documented in libtwofold(3)): found >= 0.8 at
 * 50 and 300 per day, >= 0.5 at 10 per day; false changes <= 0.5 per
 * series-year at every level. */
START_TEST(detection) {
  enum { N = 150, REP = 20 };
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 7);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  double levels[] = {10, 50, 300}, need[] = {0.5, 0.8, 0.8};
  for (int l = 0; l < 3; l++) {
    int found = 0;
    size_t falsek = 0;
    for (int rep = 0; rep < REP; rep++) {
      double y[N], pm;
      regional(y, N, r, levels[l], 0.02, -0.03, 75);
      size_t k = run_map(ch, y, N, &pm);
      int hit = 0;
      for (size_t j = 0; j < k; j++) {
        size_t d;
        twofold_changes_map_change(ch, j, &d, NULL, NULL, NULL);
        if (d + 7 >= 75 && d <= 75 + 7)
          hit = 1;
      }
      found += hit;
      regional(y, N, r, levels[l], 0.01, 0.01, N);
      falsek += run_map(ch, y, N, &pm);
    }
    double share = (double)found / REP;
    double fpy = (double)falsek / (REP * N / 365.25);
    printf("detection at %g/day: found within 7 days %.2f, false changes "
           "per series-year %.2f\n",
           levels[l], share, fpy);
    fflush(stdout);
    ck_assert_double_ge(share, need[l]);
    ck_assert_double_le(fpy, 0.5);
  }
  twofold_changes_free(ch);
  gsl_rng_free(r);
}
END_TEST

/* Coverage on negative-binomial data (METHODS B6: a tempered likelihood is
 * not generative, so calibration is checked by coverage instead of SBC).
 * Series of 120 days with a constant growth rate (0.01 a day), weekday
 * factors as above and NB2 noise with theta 10 (strongly overdispersed)
 * at 50 and 500 a day, GSL MT19937 seed 11: the share of series whose 95%
 * credible interval for the growth rate on the last day and on the middle
 * day contains the true rate, with the dispersion estimated (the default,
 * tempered) and fixed at 1 (plain Poisson).  The default must reach the
 * lower end of the binomial 99% band around 0.95 for 200 series
 * (0.95 - 2.576 sqrt(0.95 x 0.05 / 200) = 0.910, handbook normal
 * approximation); plain Poisson falls far short, which is why the
 * dispersion is estimated.  Coverage above nominal is allowed: a
 * changepoint posterior keeps some weight on changes near the last day. */
START_TEST(coverage_nb) {
  enum { N = 120, REP = 100 };
  const double g = 0.01, theta = 10, levels[2] = {50, 500};
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 11);
  twofold_cp_options *o[2];
  for (int m = 0; m < 2; m++) {
    twofold_cp_options_new(&o[m]);
    if (m)
      twofold_cp_options_set_dispersion(o[m], 1);
  }
  twofold_changes *ch;
  twofold_changes_new(&ch);
  int hit[2][2] = {{0, 0}, {0, 0}}, total = 0;
  for (int l = 0; l < 2; l++)
    for (int rep = 0; rep < REP; rep++) {
      double y[N], eta = log(levels[l]);
      for (int t = 0; t < N; t++) {
        if (t > 0)
          eta += g;
        double mu = exp(eta) * wk[t % 7];
        y[t] = (double)gsl_ran_negative_binomial(r, theta / (theta + mu),
                                                 theta);
      }
      total++;
      for (int m = 0; m < 2; m++) {
        double mean[N], lo[N], hi[N];
        ck_assert_int_eq(twofold_changes_run(ch, o[m], y, N, 1), 0);
        ck_assert_int_eq(twofold_changes_growth(ch, mean, lo, hi), 0);
        hit[m][0] += lo[N - 1] <= g && g <= hi[N - 1];
        hit[m][1] += lo[N / 2] <= g && g <= hi[N / 2];
      }
    }
  double c[2][2];
  for (int m = 0; m < 2; m++)
    for (int k = 0; k < 2; k++)
      c[m][k] = (double)hit[m][k] / total;
  printf("coverage of 95%% growth intervals on NB data (theta %g), %d "
         "series: estimated dispersion: last day %.3f, middle day %.3f; "
         "dispersion 1: last day %.3f, middle day %.3f\n",
         theta, total, c[0][0], c[0][1], c[1][0], c[1][1]);
  fflush(stdout);
  double band = 0.95 - 2.576 * sqrt(0.95 * 0.05 / total);
  ck_assert_double_ge(c[0][0], band);
  ck_assert_double_ge(c[0][1], band);
  ck_assert_double_lt(c[1][1], band);
  twofold_changes_free(ch);
  for (int m = 0; m < 2; m++)
    twofold_cp_options_free(o[m]);
  gsl_rng_free(r);
}
END_TEST

static Suite *sim_suite(void) {
  Suite *s = suite_create("changes_sim");
  TCase *tc = tcase_create("calibration");
  tcase_add_test(tc, calibration_level);
  tcase_add_test(tc, calibration_jump);
  tcase_set_timeout(tc, 300);
  suite_add_tcase(s, tc);
  tc = tcase_create("simulated");
  tcase_add_test(tc, robust_to_artefacts);
  tcase_add_test(tc, detection);
  tcase_add_test(tc, coverage_nb);
  tcase_set_timeout(tc, 300);
  suite_add_tcase(s, tc);
  return s;
}

int main(void) {
  SRunner *sr = srunner_create(sim_suite());
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
