/* SPDX-License-Identifier: GPL-3.0-or-later */
/* The KINK segment marginal tf_seg_kink (lib/kink_laplace.c), which
 * evaluates E0, E1, E2 from incremental power sums by a Taylor series in
 * the growth rate, against an independent reference: the two-dimensional
 * Laplace approximation of METHODS B4 (Tierney & Kadane 1986, JASA
 * 81:82-86, in the form of the handbook formula log P = f(mode) +
 * log(2 pi) - log det(-H) / 2 + log priors) computed here with the sums
 * E_k = sum_t w_t (t - c)^k e^{b (t - c)} taken directly over the days in
 * long double and Newton iterated to convergence.
 *
 * Cases: counts of about 20-600 a day with weekday effects, missing days
 * and a bend in the growth (so that the sums are re-anchored as the mode
 * moves), one fit carried along e = s, s+1, ... as the forward pass does;
 * counts of about 1e5 a day (where an error in e^a E0 is multiplied by
 * the counts); a steep fall to zero (where |b| L is beyond the power
 * sums' range and the closed forms take over); and a fresh fit at the
 * same segments, which must agree with the carried one.  The differences
 * come mostly from the Newton stopping rule (decrement below 1e-6, the
 * Hessian taken at the last point): the closed-form evaluation that the
 * power sums replaced gave 5.6e-5, 7.7e-7, 1.4e-6 and 6.7e-6 on these
 * four cases, and the bounds are about twice those; the figures are
 * printed. */
#include "cp.h"

#include <check.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

/* The reference log P(s, e) of METHODS B4 and the mode of b. */
static double ref_kink(const tf_cpdata *d, size_t s, size_t e, double m,
                       double v, double *bmode) {
  long double c = (long double)s - 1, Y = 0, S1 = 0;
  for (size_t t = s; t <= e; t++) {
    if (isnan(d->y[t]))
      continue;
    Y += d->y[t];
    S1 += ((long double)t - c) * d->y[t];
  }
  long double phi = d->phi, rsd2 = (long double)d->rsd * d->rsd;
  long double a = m, b = d->rmean, f = 0, det = 1;
  for (int it = 0; it < 200; it++) {
    long double E0 = 0, E1 = 0, E2 = 0;
    for (size_t t = s; t <= e; t++) {
      if (isnan(d->y[t]))
        continue;
      long double u = (long double)t - c;
      long double w = d->wcls[tf_cls(d, t)] * expl(a + b * u);
      E0 += w;
      E1 += w * u;
      E2 += w * u * u;
    }
    long double za = a - m, zb = b - d->rmean;
    f = (a * Y + b * S1 - E0) / phi - 0.5L * za * za / v -
        0.5L * zb * zb / rsd2;
    long double ga = (Y - E0) / phi - za / v;
    long double gb = (S1 - E1) / phi - zb / rsd2;
    long double haa = E0 / phi + 1 / v, hab = E1 / phi,
                hbb = E2 / phi + 1 / rsd2;
    det = haa * hbb - hab * hab;
    long double da = (hbb * ga - hab * gb) / det;
    long double db = (haa * gb - hab * ga) / det;
    /* damped: at most 1 in a and 0.05 in b per step */
    long double sc = 1;
    if (fabsl(da) > 1)
      sc = 1 / fabsl(da);
    if (fabsl(sc * db) > 0.05L)
      sc = 0.05L / fabsl(db);
    a += sc * da;
    b += sc * db;
    if (sc == 1 && fabsl(da) < 1e-15L && fabsl(db) < 1e-17L)
      break;
  }
  *bmode = (double)b;
  return (double)(f - 0.5L * logl((long double)v * rsd2 * det));
}

typedef struct cmp {
  double dlp, db; /* largest |difference| in log P and in the mode of b */
  size_t n;
} cmp;

/* One fit carried along e = s..e1, each against the reference. */
static void carry(const tf_cpdata *d, size_t s, size_t e1, size_t stride,
                  double m, double v, cmp *r) {
  tf_kfit fit = {.a = NAN, .b = NAN, .pa = NAN, .pb = NAN};
  for (size_t e = s; e <= e1; e++) {
    double lp = tf_seg_kink(d, s, e, m, v, &fit);
    if ((e - s) % stride != 0 && e != e1)
      continue;
    double bm, ref = ref_kink(d, s, e, m, v, &bm);
    ck_assert_msg(isfinite(lp), "[%zu, %zu]: log P %g", s, e, lp);
    double dl = fabs(lp - ref), dbb = fabs(fit.b - bm);
    if (dl > r->dlp)
      r->dlp = dl;
    if (dbb > r->db)
      r->db = dbb;
    r->n++;
  }
}

static void prepare(tf_cpdata *d, const double *y, size_t n, double phi) {
  struct twofold_cp_options o;
  tf_cp_options_defaults(&o);
  o.phi = phi;
  ck_assert_int_eq(tf_cp_prepare(d, &o, y, n, 3), 0);
}

/* Counts around mu0 e^{growth}, growth 0.03 a day, bending to -0.02 at
 * day n/2, weekday effects, every 19th day missing. */
static void bent_series(double *y, size_t n, double mu0, gsl_rng *r) {
  static const double wk[7] = {1.25, 1.1, 1.0, 1.0, 0.95, 0.6, 0.5};
  double eta = log(mu0);
  for (size_t t = 0; t < n; t++) {
    eta += t < n / 2 ? 0.03 : -0.02;
    y[t] = (double)gsl_ran_poisson(r, wk[t % 7] * exp(eta));
    if (t % 19 == 7)
      y[t] = NAN;
  }
}

START_TEST(moderate_counts) {
  enum { N = 240 };
  double y[N];
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 20261202);
  bent_series(y, N, 20, r);
  tf_cpdata d;
  prepare(&d, y, N, 0);
  cmp c = {0, 0, 0};
  size_t starts[] = {0, 1, 37, 100, 119, 200};
  for (size_t i = 0; i < sizeof starts / sizeof *starts; i++)
    carry(&d, starts[i], N - 1, 1, log(20.0) + 0.03 * (double)starts[i],
          0.5, &c);
  printf("kink power sums, counts 20-600, phi %.3f, %zu segments: max "
         "|d log P| %.2e, max |d b| %.2e\n",
         d.phi, c.n, c.dlp, c.db);
  ck_assert_msg(c.dlp < 1.2e-4, "log P differs from the reference by %g",
                c.dlp);
  ck_assert_msg(c.db < 1e-5, "mode of b differs by %g", c.db);
  tf_cp_data_free(&d);
  gsl_rng_free(r);
}
END_TEST

START_TEST(large_counts) {
  enum { N = 400 };
  double y[N];
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 7);
  bent_series(y, N, 1e5, r);
  for (size_t t = 0; t < N; t++) /* keep the counts near 1e5 */
    if (!isnan(y[t]))
      y[t] = (double)gsl_ran_poisson(
          r, 1e5 * exp(0.003 * (double)(t < N / 2 ? t : N - t)));
  tf_cpdata d;
  prepare(&d, y, N, 1);
  cmp c = {0, 0, 0};
  carry(&d, 0, N - 1, 7, log(1e5), 1, &c);
  carry(&d, 150, N - 1, 7, log(1e5) + 0.45, 1, &c);
  printf("kink power sums, counts near 1e5, phi 1, %zu segments: max "
         "|d log P| %.2e, max |d b| %.2e\n",
         c.n, c.dlp, c.db);
  ck_assert_msg(c.dlp < 1.5e-6, "log P differs from the reference by %g",
                c.dlp);
  ck_assert_msg(c.db < 1e-9, "mode of b differs by %g", c.db);
  tf_cp_data_free(&d);
  gsl_rng_free(r);
}
END_TEST

START_TEST(steep_fall) {
  /* 1e4 a day falling to zero in two weeks, then zeros for a year: the
   * mode of b is so negative that |b| L leaves the power sums' range */
  enum { N = 400 };
  double y[N];
  for (size_t t = 0; t < N; t++)
    y[t] = t < 14 ? floor(1e4 * exp(-0.6 * (double)t)) : 0;
  tf_cpdata d;
  prepare(&d, y, N, 1);
  cmp c = {0, 0, 0};
  carry(&d, 0, N - 1, 13, log(1e4), 1, &c);
  printf("kink power sums, steep fall to zero, %zu segments: max |d log P| "
         "%.2e, max |d b| %.2e\n",
         c.n, c.dlp, c.db);
  ck_assert_msg(c.dlp < 3e-6, "log P differs from the reference by %g",
                c.dlp);
  ck_assert_msg(c.db < 1e-5, "mode of b differs by %g", c.db);
  tf_cp_data_free(&d);
}
END_TEST

START_TEST(fresh_equals_carried) {
  enum { N = 300 };
  double y[N];
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 99);
  bent_series(y, N, 50, r);
  tf_cpdata d;
  prepare(&d, y, N, 0);
  double worst = 0;
  for (size_t s = 0; s < N; s += 41) {
    tf_kfit fit = {.a = NAN, .b = NAN, .pa = NAN, .pb = NAN};
    for (size_t e = s; e < N; e++) {
      double lp = tf_seg_kink(&d, s, e, log(50.0), 1, &fit);
      if ((e - s) % 17 != 16)
        continue;
      tf_kfit f2 = {.a = NAN, .b = NAN, .pa = NAN, .pb = NAN};
      double lp2 = tf_seg_kink(&d, s, e, log(50.0), 1, &f2);
      double dl = fabs(lp - lp2);
      if (dl > worst)
        worst = dl;
    }
  }
  printf("kink power sums, carried fit against a fresh one: max |d log P| "
         "%.2e\n",
         worst);
  ck_assert_msg(worst < 1.5e-5, "carried and fresh fits differ by %g", worst);
  tf_cp_data_free(&d);
  gsl_rng_free(r);
}
END_TEST

int main(void) {
  Suite *s = suite_create("kink_sums");
  TCase *tc = tcase_create("kink_sums");
  tcase_set_timeout(tc, 60);
  tcase_add_test(tc, moderate_counts);
  tcase_add_test(tc, large_counts);
  tcase_add_test(tc, steep_fall);
  tcase_add_test(tc, fresh_equals_carried);
  suite_add_tcase(s, tc);
  SRunner *sr = srunner_create(s);
  srunner_run_all(sr, CK_NORMAL);
  int nf = srunner_ntests_failed(sr);
  srunner_free(sr);
  return nf == 0 ? EXIT_SUCCESS : EXIT_FAILURE;
}
