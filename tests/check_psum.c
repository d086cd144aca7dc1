/* SPDX-License-Identifier: GPL-3.0-or-later */
/* The incremental power sums of lib/segment.c (tf_psum, cp.h) against
 * direct summation of their definition E_j(b) = sum_t w_t u^j e^{b u} over
 * the present days (the reference: the definition itself, summed term by
 * term in long double), and the JUMP segment marginal computed with them
 * (tf_seg_jump_ps) against the Laplace formula of METHODS B5 summed
 * directly in long double at its mode, and its mode against the
 * step-halving Newton solver tf_seg_jump, which evaluates the closed-form
 * weekday-class geometric sums (METHODS B2-B3; Fearnhead 2006 for the
 * model, Tierney & Kadane 1986 for the Laplace step).
 * Cases: random slopes b within and beyond the re-anchoring band, missing
 * days (isolated and in runs), segments up to 2000 days, counts up to 1e6
 * a day.  Tolerances: E_j within 1e-14 relative of the direct sum (the
 * series remainder is below 2^-56 by construction; the rest is the
 * rounding of sums of up to 2000 terms, times the condition number
 * 1 + |b| umax of E_j in b, as b u is rounded); the log marginal within
 * 1e-10 + 4e-15 ap (1 + log ap), ap = alpha + Y/phi, of tf_seg_jump: the
 * marginal is a difference of terms of size ap log ap, so that is the
 * rounding of either method; the mode within 1e-7 posterior standard
 * deviations.  Compiled with lib/segment.c
 * directly (the functions are not exported). */
#include "cp.h"

#include <check.h>
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A series of n days: weekday weights from fixed effects, first day's
 * class cls0, NaN days where miss[] says. */
static void fill_weights(tf_cpdata *d, int cls0) {
  static const double delta[7] = {0.3, -0.1, 0.05, 0.0, -0.2, -0.4, 0.35};
  memset(d, 0, sizeof *d);
  d->cls0 = cls0;
  for (int c = 0; c < 7; c++) {
    d->delta[c] = delta[c];
    d->wcls[c] = exp(delta[c]);
  }
}

/* long double reference */
static void direct(const tf_cpdata *d, size_t s, size_t e, double b,
                   long double *E) {
  for (int j = 0; j < 4; j++)
    E[j] = 0;
  for (size_t t = s; t <= e; t++) {
    if (isnan(d->y[t]))
      continue;
    long double u = (long double)(t - s);
    long double w = (long double)d->wcls[tf_cls(d, t)] * expl((long double)b * u);
    E[0] += w;
    E[1] += w * u;
    E[2] += w * u * u;
    E[3] += w * u * u * u;
  }
}

/* The Laplace log marginal of METHODS B5 at slope b, summed directly in
 * long double: m(b) + log sqrt(2 pi) - log sqrt(-m''(b)) without the
 * per-day constants, as tf_seg_jump returns it. */
static long double ref_lp(const tf_cpdata *d, size_t s, size_t e, double b) {
  long double c = 0.5L * ((long double)s + (long double)e);
  long double E0 = 0, E1 = 0, E2 = 0, Y = 0, S1 = 0;
  for (size_t t = s; t <= e; t++) {
    if (isnan(d->y[t]))
      continue;
    long double u = (long double)t - c;
    long double w = (long double)d->wcls[tf_cls(d, t)] * expl((long double)b * u);
    E0 += w;
    E1 += w * u;
    E2 += w * u * u;
    Y += d->y[t];
    S1 += u * d->y[t];
  }
  if (E0 == 0) /* no data: marginal likelihood 1 */
    return 0;
  long double phi = d->phi, ap = d->alpha + Y / phi, beta = d->beta;
  long double x = E0 / phi, m1 = E1 / E0, m2 = E2 / E0, V = m2 - m1 * m1;
  long double bx = beta + x, r = x / bx;
  long double z = ((long double)b - d->rmean) / d->rsd;
  long double f = b * S1 / phi - ap * logl(bx) - 0.5L * z * z;
  long double f2 = -ap * r * (r * V + beta / bx * m2) - 1 / ((long double)d->rsd * d->rsd);
  return f + d->alpha * logl(beta) - lgammal(d->alpha) + lgammal(ap) -
         logl(d->rsd) - 0.5L * logl(-f2);
}

START_TEST(sums_against_direct) {
  tf_rng rng;
  tf_rng_seed(&rng, 20261202);
  double worst = 0;
  long nev = 0, nre = 0;
  for (int rep = 0; rep < 300; rep++) {
    size_t n = 1 + (size_t)(tf_rng_unif(&rng) * 2000);
    tf_cpdata d;
    fill_weights(&d, (int)(tf_rng_unif(&rng) * 7));
    d.n = n;
    d.y = malloc(n * sizeof(double));
    ck_assert_ptr_nonnull(d.y);
    double pm = rep % 3 == 0 ? 0 : (rep % 3 == 1 ? 0.05 : 0.5);
    for (size_t t = 0; t < n; t++) {
      d.y[t] = tf_rng_unif(&rng) < pm ? NAN : 1.0;
      if (rep % 7 == 0 && t > n / 3 && t < n / 2) /* a run of missing days */
        d.y[t] = NAN;
    }
    /* slopes with |b| L up to about 8 */
    double bscale = 8.0 / (double)n;
    double bref = (2 * tf_rng_unif(&rng) - 1) * bscale;
    tf_psum p;
    tf_psum_init(&p, 0, bref);
    size_t e = 0;
    while (e < n) {
      size_t step = 1 + (size_t)(tf_rng_unif(&rng) * (double)(n / 8 + 1));
      e = e + step < n ? e + step : n - 1;
      tf_psum_extend(&p, &d, e);
      for (int k = 0; k < 5; k++) {
        double b = bref + (2 * tf_rng_unif(&rng) - 1) * 1.5 / (double)(e + 1);
        double E[TF_PSUM_NMOM];
        int rc = tf_psum_eval(&p, b, 4, E);
        if (rc == 1) {
          tf_psum_reanchor(&p, &d, b);
          bref = b;
          nre++;
          rc = tf_psum_eval(&p, b, 4, E);
        }
        ck_assert_int_eq(rc, 0);
        long double R[4];
        direct(&d, 0, e, b, R);
        for (int j = 0; j < 4; j++) {
          if (R[j] == 0) {
            ck_assert(E[j] == 0);
            continue;
          }
          double rel = (double)fabsl(((long double)E[j] - R[j]) / R[j]);
          if (rel > worst)
            worst = rel;
          ck_assert_msg(rel < 1e-14 * (1 + fabs(b) * p.umax),
                        "n %zu e %zu b %.17g bref %.17g: E_%d %.17g, direct "
                        "%.17Lg (rel %.2e)",
                        n, e, b, p.bref, j, E[j], R[j], rel);
        }
        /* fewer moments: the same leading values */
        double E2[2];
        ck_assert_int_eq(tf_psum_eval(&p, b, 2, E2), 0);
        ck_assert(E2[0] == E[0] && E2[1] == E[1]);
        nev++;
      }
      if (e == n - 1)
        break;
    }
    free(d.y);
  }
  printf("power sums: %ld evaluations, %ld re-anchorings, worst relative "
         "difference from direct summation %.2e (tolerance 1e-14 (1 + |b| umax))\n",
         nev, nre, worst);
}
END_TEST

START_TEST(band_refused) {
  tf_cpdata d;
  fill_weights(&d, 0);
  double y[100];
  for (int t = 0; t < 100; t++)
    y[t] = 1;
  d.y = y;
  d.n = 100;
  tf_psum p;
  tf_psum_init(&p, 0, 0.0);
  tf_psum_extend(&p, &d, 99);
  double E[4];
  ck_assert_int_eq(tf_psum_eval(&p, 0.5 / 99, 4, E), 0);
  ck_assert_int_eq(tf_psum_eval(&p, 1.5 / 99, 4, E), 1);
  ck_assert_int_eq(tf_psum_eval(&p, NAN, 4, E), 1);
  tf_psum_reanchor(&p, &d, 1.5 / 99);
  ck_assert_int_eq(tf_psum_eval(&p, 1.5 / 99, 4, E), 0);
  /* overflow: unusable */
  tf_psum_init(&p, 0, 30.0);
  tf_psum_extend(&p, &d, 99);
  ck_assert_int_eq(tf_psum_eval(&p, 30.0, 4, E), -1);
}
END_TEST

/* the JUMP marginal with the sums against tf_seg_jump */
START_TEST(jump_against_solver) {
  tf_rng rng;
  tf_rng_seed(&rng, 7);
  double worst = 0, worstb = 0, worsts = 0;
  long ncmp = 0;
  for (int rep = 0; rep < 40; rep++) {
    size_t n = 30 + (size_t)(tf_rng_unif(&rng) * 700);
    double *y = malloc(n * sizeof(double));
    ck_assert_ptr_nonnull(y);
    double lvl = exp(tf_rng_unif(&rng) * log(1e6)); /* 1 .. 1e6 a day */
    double r = 0.02 * tf_rng_norm(&rng), eta = log(lvl);
    for (size_t t = 0; t < n; t++) {
      if (tf_rng_unif(&rng) < 1.0 / 60)
        r = 0.03 * tf_rng_norm(&rng);
      eta += r;
      if (eta > log(2e6) || eta < log(0.3))
        r = -r;
      double mu = exp(eta);
      /* Poisson by normal approximation, or inversion for small mu */
      double v;
      if (mu > 50) {
        v = floor(mu + sqrt(mu) * tf_rng_norm(&rng) + 0.5);
        if (v < 0)
          v = 0;
      } else {
        double L = exp(-mu), pr = 1;
        v = -1;
        do {
          v++;
          pr *= tf_rng_unif(&rng);
        } while (pr > L);
      }
      y[t] = tf_rng_unif(&rng) < 0.04 ? NAN : v;
    }
    struct twofold_cp_options o;
    memset(&o, 0, sizeof o);
    o.kind = 1; /* jump */
    o.alpha = 1;
    o.rsd = 0.1;
    o.weekday = rep % 2;
    o.phi = rep % 3 == 0 ? 1 : 0;
    tf_cpdata d;
    ck_assert_int_eq(tf_cp_prepare(&d, &o, y, n, 1 + rep % 7), 0);
    for (int k = 0; k < 3; k++) {
      size_t s = (size_t)(tf_rng_unif(&rng) * (double)(n / 2));
      tf_psum p;
      tf_psum_init(&p, s, d.rmean);
      double bw = d.rmean, bprev = NAN;
      for (size_t e = s; e < n; e++) {
        double b1 = bw;
        if (isfinite(bprev))
          bw = bw + (bw - bprev);
        double bf = bw, vf, lf, bs = d.rmean, vs, ls;
        double lpf = tf_seg_jump_ps(&d, &p, e, &bf, &vf, &lf);
        double lps = tf_seg_jump(&d, s, e, &bs, &vs, &ls);
        bprev = b1;
        bw = bf;
        double ap = d.alpha + tf_sumy(&d, s, e) / d.phi;
        double tol = 1e-10 + 4e-15 * ap * (1 + log(ap));
        double ref = (double)ref_lp(&d, s, e, bf);
        double dl = fabs(lpf - ref) / tol, ds = fabs(lps - ref) / tol;
        ck_assert_msg(dl < 1,
                      "rep %d [%zu, %zu]: log marginal %.17g, direct %.17g, "
                      "solver %.17g",
                      rep, s, e, lpf, ref, lps);
        if (ds > worsts)
          worsts = ds;
        double db = fabs(bf - bs) / sqrt(vs);
        ck_assert_msg(db < 1e-7, "rep %d [%zu, %zu]: mode %.17g, solver %.17g",
                      rep, s, e, bf, bs);
        ck_assert_msg(fabs(vf - vs) <= 1e-6 * vs, "variance %.17g, solver %.17g", vf, vs);
        if (isfinite(ls))
          ck_assert_msg(fabs(lf - ls) <= 1e-6 * ls, "level %.17g, solver %.17g", lf, ls);
        if (dl > worst)
          worst = dl;
        if (db > worstb)
          worstb = db;
        ncmp++;
      }
    }
    tf_cp_data_free(&d);
    free(y);
  }
  printf("jump marginal: %ld segments, worst |log marginal - direct| %.2f "
         "of the tolerance (tf_seg_jump: %.2f), worst mode difference from "
         "tf_seg_jump %.2e sd\n",
         ncmp, worst, worsts, worstb);
}
END_TEST

int main(void) {
  Suite *s = suite_create("psum");
  TCase *tc = tcase_create("core");
  tcase_set_timeout(tc, 120);
  tcase_add_test(tc, sums_against_direct);
  tcase_add_test(tc, band_refused);
  tcase_add_test(tc, jump_against_solver);
  suite_add_tcase(s, tc);
  SRunner *sr = srunner_create(s);
  srunner_run_all(sr, CK_NORMAL);
  int nf = srunner_ntests_failed(sr);
  srunner_free(sr);
  return nf == 0 ? EXIT_SUCCESS : EXIT_FAILURE;
}
