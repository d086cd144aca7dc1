/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Unit tests: generation intervals and reproduction numbers from growth
 * rates, R = 1 / M(-r) (Wallinga J, Lipsitch M, 2007, Proc R Soc B
 * 274:599-604).
 *
 * References outside the project, named beside each check:
 *  - GSL numerical quadrature (gsl_integration_qagiu) of the gamma density
 *    (gsl_ran_gamma_pdf) times e^{-rt}: the moment generating function by
 *    its definition, independent of the closed form in the library;
 *  - published values: Wallinga & Lipsitch (2007) p. 603 and an H1N1 2009
 *    teaching example, as quoted in the project's methods brief, and values
 *    computed in R 4.2.2 for that brief;
 *  - handbook formulas worked by hand (discrete means and variances).
 *
 * GSL's error handler is left at its default (abort): every GSL call
 * below gets valid arguments, so reaching the handler fails the test.
 */
#include "twofold.h"

#include <check.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_randist.h>
#include <math.h>
#include <stdlib.h>

static double rel_err(double got, double want) {
  return fabs(got - want) / fabs(want);
}

static double R_of(double mean, double sd, double r) {
  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_gamma(mean, sd, &gi), 0);
  double R = NAN;
  ck_assert_int_eq(twofold_gi_reproduction(gi, r, &R), 0);
  twofold_gi_free(gi);
  return R;
}

/* --- (a) gamma closed form against quadrature of the MGF ---------------- */

struct mgf_params {
  double shape, scale, r;
};

/* gamma density times e^{-rt}.  Where the density underflows to 0 the
 * product is 0 (this avoids 0 * inf far out in the tail for r < 0). */
static double mgf_integrand(double t, void *vp) {
  const struct mgf_params *p = vp;
  double f = gsl_ran_gamma_pdf(t, p->shape, p->scale);
  if (f == 0.0)
    return 0.0;
  return f * exp(-p->r * t);
}

START_TEST(gamma_closed_form_vs_quadrature) {
  /* (mean, sd) pairs: shape a = m^2/s^2 = 9.39 (W&L influenza), 2.25,
   * 1 (exponential), 4, 16 and 1.5625. */
  static const double gis[][2] = {{2.85, 0.93}, {3.0, 2.0}, {5.0, 5.0},
                                  {6.5, 3.25}, {8.0, 2.0},  {4.0, 3.2}};
  static const double rs[] = {-0.2, -0.1, -0.03, -0.001, 0.0,
                              0.001, 0.02, 0.053, 0.1,   0.2, 0.35};
  gsl_integration_workspace *ws = gsl_integration_workspace_alloc(1000);
  ck_assert_ptr_nonnull(ws);
  int compared = 0;
  for (size_t g = 0; g < sizeof gis / sizeof gis[0]; g++) {
    double m = gis[g][0], s = gis[g][1];
    double a = m * m / (s * s), b = m / (s * s);
    for (size_t i = 0; i < sizeof rs / sizeof rs[0]; i++) {
      double r = rs[i];
      /* The MGF integral exists for r > -b; keep well inside, where the
       * integrand still decays like e^{-(b+r)t} with b + r >= b/2. */
      if (!(r > -0.5 * b))
        continue;
      struct mgf_params p = {a, 1.0 / b, r};
      gsl_function F = {mgf_integrand, &p};
      double M = NAN, abserr = NAN;
      int st = gsl_integration_qagiu(&F, 0.0, 0.0, 1e-12, 1000, ws, &M,
                                     &abserr);
      ck_assert_int_eq(st, 0);
      double R = R_of(m, s, r);
      ck_assert_msg(rel_err(R, 1.0 / M) < 1e-10,
                    "mean %g sd %g r %g: closed form %.15g, quadrature "
                    "%.15g",
                    m, s, r, R, 1.0 / M);
      compared++;
    }
  }
  gsl_integration_workspace_free(ws);
  ck_assert_int_ge(compared, 60);
}
END_TEST

/* --- (b) published check values ------------------------------------------ */

/* Wallinga & Lipsitch (2007) p. 603, influenza: generation interval mean
 * 2.85 d, SD 0.93 d, r = 0.2 per day. */
START_TEST(wallinga_lipsitch_influenza) {
  /* Gamma interval: R = 1.73911, computed (R 4.2.2) for the methods brief
   * (METHODS.md D3, a = 9.39126, theta = 0.30347); not a value printed in
   * the paper. */
  double R = R_of(2.85, 0.93, 0.2);
  ck_assert_msg(fabs(R - 1.73911) < 5e-6, "gamma R %.8f", R);

  /* Exponential interval (the SIR model), published R = 1.57 (W&L 2007
   * p. 603, via a secondary source quoting the paper).  A gamma with
   * sd = mean is the exponential; the handbook formula is R = 1 + r m. */
  R = R_of(2.85, 2.85, 0.2);
  ck_assert_msg(fabs(R - (1.0 + 0.2 * 2.85)) < 1e-12, "SIR R %.15g", R);
  ck_assert_msg(fabs(R - 1.57) < 0.005, "SIR R %.6f vs published 1.57", R);

  /* SEIR, published R = 1.65 (same source).  With equal mean latent and
   * infectious periods the interval is Erlang(2): gamma with
   * sd = mean/sqrt(2), R = (1 + r m/2)^2 = 1.651225 (handbook formula,
   * computed in METHODS.md D3). */
  R = R_of(2.85, 2.85 / sqrt(2.0), 0.2);
  ck_assert_msg(fabs(R - 1.651225) < 1e-9, "SEIR R %.10f", R);
  ck_assert_msg(fabs(R - 1.65) < 0.005, "SEIR R %.6f vs published 1.65", R);

  /* A fixed interval gives the upper bound e^{rm} = 1.76827 (W&L 2007
   * abstract; value computed in METHODS.md D3): the gamma R lies below. */
  double Rg = R_of(2.85, 0.93, 0.2);
  ck_assert(Rg < 1.76827);
  /* as the sd shrinks the gamma R approaches the bound */
  R = R_of(2.85, 1e-4, 0.2);
  ck_assert_msg(fabs(R - 1.76827) < 5e-6, "near-delta R %.8f", R);
}
END_TEST

/* H1N1 2009 teaching example (secondary teaching page, as quoted in
 * METHODS.md D3): r = 0.053 (0.0014, 0.12) per day, gamma interval mean 3 d,
 * SD 2 d, R0 = 1.17 (1.00-1.40); recomputed (R 4.2.2, METHODS.md D3)
 * 1.1661, 1.0042, 1.3965. */
START_TEST(h1n1_teaching_example) {
  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_gamma(3.0, 2.0, &gi), 0);
  double R, lo, hi;
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.053, 0.0014, 0.12, &R, &lo, &hi),
      0);
  /* published, two decimals */
  ck_assert_msg(fabs(R - 1.17) < 0.005, "R %.6f", R);
  ck_assert_msg(fabs(lo - 1.00) < 0.005, "R_lo %.6f", lo);
  ck_assert_msg(fabs(hi - 1.40) < 0.005, "R_hi %.6f", hi);
  /* recomputed, four decimals */
  ck_assert_msg(fabs(R - 1.1661) < 5e-5, "R %.6f", R);
  ck_assert_msg(fabs(lo - 1.0042) < 5e-5, "R_lo %.6f", lo);
  ck_assert_msg(fabs(hi - 1.3965) < 5e-5, "R_hi %.6f", hi);
  /* the interval agrees with the point function at each end */
  double v;
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.0014, &v), 0);
  ck_assert(v == lo);
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.12, &v), 0);
  ck_assert(v == hi);
  ck_assert(lo < R && R < hi);
  twofold_gi_free(gi);
}
END_TEST

START_TEST(gamma_basic_properties) {
  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_gamma(3.0, 2.0, &gi), 0);
  ck_assert(twofold_gi_mean(gi) == 3.0);
  ck_assert(twofold_gi_sd(gi) == 2.0);
  double R = NAN;
  /* r = 0: R = 1 exactly (M(0) = 1 for any distribution) */
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.0, &R), 0);
  ck_assert(R == 1.0);
  /* monotone in r over a grid (W&L 2007: R increases with r) */
  double prev = 0.0;
  for (double r = -0.7; r <= 1.0; r += 0.01) {
    ck_assert_int_eq(twofold_gi_reproduction(gi, r, &R), 0);
    ck_assert_msg(R > prev, "r %g: R %g after %g", r, R, prev);
    prev = R;
  }
  /* small r: R = 1 + r m + O(r^2) (first moment of the interval) */
  ck_assert_int_eq(twofold_gi_reproduction(gi, 1e-9, &R), 0);
  ck_assert_msg(fabs((R - 1.0) / 1e-9 - 3.0) < 1e-5, "R - 1 = %.17g", R - 1);
  twofold_gi_free(gi);
  ck_assert(isnan(twofold_gi_mean(NULL)));
  ck_assert(isnan(twofold_gi_sd(NULL)));
  twofold_gi_free(NULL);
}
END_TEST

/* --- (c) discrete intervals ----------------------------------------------- */

/* METHODS.md D-link: w_1..5 = (0.2, 0.4, 0.25, 0.1, 0.05) and r = 0.1 give
 * R = 1/sum w_s e^{-0.1 s} = 1.264186 (computed, R 4.2.2, for the brief;
 * the renewal ratio I_t/Lambda_t for I_t = e^{0.1 t}). */
START_TEST(discrete_worked_example) {
  static const double w[] = {0.2, 0.4, 0.25, 0.1, 0.05};
  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_discrete(w, 5, &gi), 0);
  double R = NAN;
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.1, &R), 0);
  ck_assert_msg(fabs(R - 1.264186) < 5e-7, "R %.8f", R);
  /* mean = sum s w_s = 2.4 and variance = sum s^2 w_s - 2.4^2 = 6.9 - 5.76
   * = 1.14 (worked by hand) */
  ck_assert_msg(fabs(twofold_gi_mean(gi) - 2.4) < 1e-14, "mean %.17g",
                twofold_gi_mean(gi));
  ck_assert_msg(fabs(twofold_gi_sd(gi) - sqrt(1.14)) < 1e-14, "sd %.17g",
                twofold_gi_sd(gi));
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.0, &R), 0);
  ck_assert_msg(fabs(R - 1.0) < 1e-15, "R(0) %.17g", R);
  twofold_gi_free(gi);

  /* unnormalised weights (times 40, with trailing zeros) give the same R */
  static const double w40[] = {8.0, 16.0, 10.0, 4.0, 2.0, 0.0, 0.0};
  ck_assert_int_eq(twofold_gi_new_discrete(w40, 7, &gi), 0);
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.1, &R), 0);
  ck_assert_msg(fabs(R - 1.264186) < 5e-7, "R %.8f", R);
  twofold_gi_free(gi);

  /* tiny and huge scales do not overflow the normalisation */
  double tiny[5], huge[5];
  for (int k = 0; k < 5; k++) {
    tiny[k] = w[k] * 1e-310;
    huge[k] = w[k] * 1e307;
  }
  ck_assert_int_eq(twofold_gi_new_discrete(huge, 5, &gi), 0);
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.1, &R), 0);
  ck_assert_msg(fabs(R - 1.264186) < 5e-7, "huge R %.8f", R);
  twofold_gi_free(gi);
  ck_assert_int_eq(twofold_gi_new_discrete(tiny, 5, &gi), 0);
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.1, &R), 0);
  ck_assert_msg(fabs(R - 1.264186) < 1e-6, "tiny R %.8f", R);
  twofold_gi_free(gi);
}
END_TEST

/* A fixed interval of 3 days: R = e^{3r} (the fixed-interval case e^{rm}
 * of W&L 2007); large |r| is evaluated in log space without overflow. */
START_TEST(discrete_point_mass) {
  static const double p[] = {0.0, 0.0, 1.0}; /* always 3 days */
  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_discrete(p, 3, &gi), 0);
  ck_assert(twofold_gi_mean(gi) == 3.0);
  ck_assert(twofold_gi_sd(gi) == 0.0);
  double R = NAN;
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.2, &R), 0);
  ck_assert_msg(rel_err(R, exp(0.6)) < 1e-15, "R %.17g", R);
  ck_assert_int_eq(twofold_gi_reproduction(gi, 200.0, &R), 0);
  ck_assert_msg(rel_err(R, exp(600.0)) < 1e-13, "R %.17g", R);
  ck_assert_int_eq(twofold_gi_reproduction(gi, -200.0, &R), 0);
  ck_assert_msg(rel_err(R, exp(-600.0)) < 1e-13, "R %.17g", R);
  twofold_gi_free(gi);
}
END_TEST

/* A fine discretisation of a gamma interval matches the closed form.  The
 * discrete type counts whole steps, so measure time in steps of h days:
 * p_k = F((k+1.5)h) - F((k+0.5)h) (the mass nearest (k+1)h, the first bin
 * taking [0, 1.5h)), with F the gamma CDF (gsl_cdf_gamma_P), and growth
 * r h per step.  The midpoint rule error is O(h^2). */
START_TEST(discrete_fine_gamma) {
  const double m = 3.0, s = 2.0, h = 0.002;
  const double a = m * m / (s * s), scale = s * s / m;
  size_t n = (size_t)(60.0 * m / h);
  double *p = malloc(n * sizeof *p);
  ck_assert_ptr_nonnull(p);
  double prev = 0.0;
  for (size_t k = 0; k < n; k++) {
    double F = gsl_cdf_gamma_P(((double)k + 1.5) * h, a, scale);
    p[k] = F - prev;
    prev = F;
  }
  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_discrete(p, n, &gi), 0);
  free(p);
  ck_assert_msg(fabs(twofold_gi_mean(gi) * h - m) < 1e-4, "mean %g",
                twofold_gi_mean(gi) * h);
  ck_assert_msg(fabs(twofold_gi_sd(gi) * h - s) < 1e-4, "sd %g",
                twofold_gi_sd(gi) * h);
  static const double rs[] = {-0.3, -0.05, 0.0, 0.053, 0.12, 0.3};
  for (size_t i = 0; i < sizeof rs / sizeof rs[0]; i++) {
    double R = NAN;
    ck_assert_int_eq(twofold_gi_reproduction(gi, rs[i] * h, &R), 0);
    double want = R_of(m, s, rs[i]);
    ck_assert_msg(rel_err(R, want) < 1e-5, "r %g: discrete %.10f gamma %.10f",
                  rs[i], R, want);
  }
  twofold_gi_free(gi);
}
END_TEST

/* --- (d) every error return ------------------------------------------------ */

START_TEST(gamma_errors) {
  twofold_gi *gi = (twofold_gi *)1; /* must be reset to NULL on failure */
  static const double bad[] = {0.0, -1.0, -0.0};
  ck_assert_int_eq(twofold_gi_new_gamma(3.0, 2.0, NULL), TWOFOLD_EINVAL);
  for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
    gi = (twofold_gi *)1;
    ck_assert_int_eq(twofold_gi_new_gamma(bad[i], 2.0, &gi), TWOFOLD_EINVAL);
    ck_assert_ptr_null(gi);
    gi = (twofold_gi *)1;
    ck_assert_int_eq(twofold_gi_new_gamma(3.0, bad[i], &gi), TWOFOLD_EINVAL);
    ck_assert_ptr_null(gi);
  }
  ck_assert_int_eq(twofold_gi_new_gamma(NAN, 2.0, &gi), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_new_gamma(3.0, NAN, &gi), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_new_gamma(INFINITY, 2.0, &gi), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_new_gamma(3.0, INFINITY, &gi), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_new_gamma(-INFINITY, 2.0, &gi), TWOFOLD_EINVAL);
  /* parameters that overflow or underflow: a = m^2/s^2 or b = m/s^2 */
  ck_assert_int_eq(twofold_gi_new_gamma(1e200, 1e-200, &gi), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_new_gamma(1e-200, 1e200, &gi), TWOFOLD_EINVAL);
  ck_assert_ptr_null(gi);

  ck_assert_int_eq(twofold_gi_new_gamma(3.0, 2.0, &gi), 0);
  double R = 0.0;
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.1, NULL), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_reproduction(NULL, 0.1, &R), TWOFOLD_EINVAL);
  ck_assert(isnan(R));
  R = 0.0;
  ck_assert_int_eq(twofold_gi_reproduction(gi, NAN, &R), TWOFOLD_EINVAL);
  ck_assert(isnan(R));
  ck_assert_int_eq(twofold_gi_reproduction(gi, INFINITY, &R), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_reproduction(gi, -INFINITY, &R),
                   TWOFOLD_EINVAL);
  /* rate b = m/s^2 = 0.75: M(-r) diverges for r <= -0.75 */
  R = 0.0;
  ck_assert_int_eq(twofold_gi_reproduction(gi, -0.75, &R), TWOFOLD_ERANGE);
  ck_assert(isnan(R));
  ck_assert_int_eq(twofold_gi_reproduction(gi, -1.5, &R), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_gi_reproduction(gi, -1e300, &R), TWOFOLD_ERANGE);
  /* just inside: defined and small */
  ck_assert_int_eq(twofold_gi_reproduction(gi, -0.7499, &R), 0);
  ck_assert(R > 0.0 && R < 1e-5);
  /* R overflows a double: (1 + r/b)^a with a = 2.25 and r/b = 1e300 */
  ck_assert_int_eq(twofold_gi_reproduction(gi, 0.75e300, &R),
                   TWOFOLD_ERANGE);
  ck_assert(isnan(R));
  twofold_gi_free(gi);
}
END_TEST

START_TEST(discrete_errors) {
  static const double w[] = {0.2, 0.4, 0.25, 0.1, 0.05};
  twofold_gi *gi = (twofold_gi *)1;
  ck_assert_int_eq(twofold_gi_new_discrete(w, 5, NULL), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_gi_new_discrete(NULL, 5, &gi), TWOFOLD_EINVAL);
  ck_assert_ptr_null(gi);
  gi = (twofold_gi *)1;
  ck_assert_int_eq(twofold_gi_new_discrete(w, 0, &gi), TWOFOLD_EINVAL);
  ck_assert_ptr_null(gi);
  static const double zeros[] = {0.0, 0.0, 0.0};
  ck_assert_int_eq(twofold_gi_new_discrete(zeros, 3, &gi), TWOFOLD_EINVAL);
  double v[3] = {0.5, -0.1, 0.6};
  ck_assert_int_eq(twofold_gi_new_discrete(v, 3, &gi), TWOFOLD_EINVAL);
  v[1] = NAN;
  ck_assert_int_eq(twofold_gi_new_discrete(v, 3, &gi), TWOFOLD_EINVAL);
  v[1] = INFINITY;
  ck_assert_int_eq(twofold_gi_new_discrete(v, 3, &gi), TWOFOLD_EINVAL);
  v[1] = -INFINITY;
  ck_assert_int_eq(twofold_gi_new_discrete(v, 3, &gi), TWOFOLD_EINVAL);
  ck_assert_ptr_null(gi);
  ck_assert_int_eq(twofold_gi_new_discrete(w, SIZE_MAX, &gi),
                   TWOFOLD_ETOOLARGE);
  ck_assert_ptr_null(gi);

  ck_assert_int_eq(twofold_gi_new_discrete(w, 5, &gi), 0);
  double R = 0.0;
  ck_assert_int_eq(twofold_gi_reproduction(gi, NAN, &R), TWOFOLD_EINVAL);
  ck_assert(isnan(R));
  ck_assert_int_eq(twofold_gi_reproduction(gi, INFINITY, &R), TWOFOLD_EINVAL);
  /* R >= 0.2 e^{r} overflows a double for r = 1000 (day 1 has mass 0.2) */
  R = 0.0;
  ck_assert_int_eq(twofold_gi_reproduction(gi, 1000.0, &R), TWOFOLD_ERANGE);
  ck_assert(isnan(R));
  ck_assert_int_eq(twofold_gi_reproduction(gi, 1e308, &R), TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_gi_reproduction(gi, -1e308, &R), TWOFOLD_ERANGE);
  twofold_gi_free(gi);
}
END_TEST

START_TEST(interval_errors) {
  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_gamma(3.0, 2.0, &gi), 0);
  double R = 0, lo = 0, hi = 0;
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(NULL, 0.05, 0.0, 0.1, &R, &lo, &hi),
      TWOFOLD_EINVAL);
  ck_assert(isnan(R) && isnan(lo) && isnan(hi));
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.05, 0.0, 0.1, NULL, &lo, &hi),
      TWOFOLD_EINVAL);
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.05, 0.0, 0.1, &R, NULL, &hi),
      TWOFOLD_EINVAL);
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.05, 0.0, 0.1, &R, &lo, NULL),
      TWOFOLD_EINVAL);
  /* order r_lo <= r <= r_hi */
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.05, 0.06, 0.1, &R, &lo, &hi),
      TWOFOLD_EINVAL);
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.05, 0.0, 0.04, &R, &lo, &hi),
      TWOFOLD_EINVAL);
  /* non-finite values */
  static const double nf[] = {NAN, INFINITY, -INFINITY};
  for (size_t i = 0; i < 3; i++) {
    ck_assert_int_eq(
        twofold_gi_reproduction_interval(gi, nf[i], 0.0, 0.1, &R, &lo, &hi),
        TWOFOLD_EINVAL);
    ck_assert_int_eq(
        twofold_gi_reproduction_interval(gi, 0.05, nf[i], 0.1, &R, &lo, &hi),
        TWOFOLD_EINVAL);
    ck_assert_int_eq(
        twofold_gi_reproduction_interval(gi, 0.05, 0.0, nf[i], &R, &lo, &hi),
        TWOFOLD_EINVAL);
  }
  /* the lower end beyond the gamma's range (b = 0.75) */
  R = lo = hi = 0;
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.05, -0.8, 0.1, &R, &lo, &hi),
      TWOFOLD_ERANGE);
  ck_assert(isnan(R) && isnan(lo) && isnan(hi));
  /* a degenerate interval is fine */
  ck_assert_int_eq(
      twofold_gi_reproduction_interval(gi, 0.05, 0.05, 0.05, &R, &lo, &hi), 0);
  ck_assert(R == lo && R == hi);
  twofold_gi_free(gi);
}
END_TEST

static Suite *transmission_suite(void) {
  Suite *s = suite_create("transmission");
  TCase *tc = tcase_create("gamma");
  tcase_add_test(tc, gamma_closed_form_vs_quadrature);
  tcase_add_test(tc, wallinga_lipsitch_influenza);
  tcase_add_test(tc, h1n1_teaching_example);
  tcase_add_test(tc, gamma_basic_properties);
  suite_add_tcase(s, tc);
  tc = tcase_create("discrete");
  tcase_add_test(tc, discrete_worked_example);
  tcase_add_test(tc, discrete_point_mass);
  tcase_add_test(tc, discrete_fine_gamma);
  suite_add_tcase(s, tc);
  tc = tcase_create("errors");
  tcase_add_test(tc, gamma_errors);
  tcase_add_test(tc, discrete_errors);
  tcase_add_test(tc, interval_errors);
  suite_add_tcase(s, tc);
  return s;
}

int main(void) {
  SRunner *sr = srunner_create(transmission_suite());
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed == 0 ? EXIT_SUCCESS : EXIT_FAILURE;
}
