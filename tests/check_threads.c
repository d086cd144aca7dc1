/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Thread safety: fits and changepoint posteriors run from 8 threads at
 * once give results identical,
 * bit for bit, to the same fits run serially.  The header promises that
 * distinct handles may be used from distinct threads at the same time (no
 * global state); this test also runs under ThreadSanitizer (make
 * check-tsan), which reports any data race it sees.
 *
 * The series are invented: negative binomial counts (GSL's seeded
 * generator, fixed seed) around a log-linear trend with weekday effects,
 * some days missing.  Reference: the serial run of the same library (the
 * property under test is "no interference between threads"; the numbers
 * themselves are checked against statsmodels and R elsewhere). */
#include "twofold.h"

#include <check.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#define NSERIES 48
#define NDAYS 120
#define WINDOW 21
#define NTHREADS 8

/* Everything one series' fits produce, compared with memcmp. */
typedef struct result {
  int fit_status[3];     /* one per model                          */
  double fit[3][8];      /* rate, se, lo, hi, theta, loglik, disp, a */
  int roll_rc;
  double rate[NDAYS], lo[NDAYS], hi[NDAYS];
  int status[NDAYS];
  /* changepoint posterior (kink on series 8 and 32, else jump or
   * level) */
  int cp_rc;
  double p_change[NDAYS], g_mean[NDAYS], g_lo[NDAYS], g_hi[NDAYS];
  double log_evidence;
  size_t map_count;
} result;

static double series[NSERIES][NDAYS];
static int first_weekday[NSERIES];
static result serial[NSERIES];

static void make_series(void) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  ck_assert_ptr_nonnull(rng);
  gsl_rng_set(rng, 20240611UL);
  for (int s = 0; s < NSERIES; s++) {
    double a = log(5.0 + 40.0 * gsl_rng_uniform(rng));
    double r = -0.05 + 0.1 * gsl_rng_uniform(rng);
    double theta = 2.0 + 30.0 * gsl_rng_uniform(rng);
    first_weekday[s] = 1 + s % 7;
    for (int t = 0; t < NDAYS; t++) {
      double mu = exp(a + r * t + 0.3 * ((t + s) % 7 == 0));
      /* NB2 with mean mu and size theta: p = theta / (theta + mu) */
      double y = (double)gsl_ran_negative_binomial(rng, theta / (theta + mu),
                                                   theta);
      if (s % 5 == 0 && t % 17 == 3)
        y = NAN; /* missing days */
      if (s == 7)
        y = 0.0; /* an all-zero series: every fit fails the same way */
      series[s][t] = y;
    }
  }
  gsl_rng_free(rng);
}

/* All fits of series s into *res with options of one thread. */
static void run_series(int s, twofold_fit_options *const opts[3],
                       twofold_fit *fit, twofold_cp_options *const cpo[3],
                       twofold_changes *ch, result *res) {
  memset(res, 0, sizeof *res);
  for (int m = 0; m < 3; m++) {
    /* the last 28 days; ISO weekday of their first day */
    int wd = (first_weekday[s] - 1 + NDAYS - 28) % 7 + 1;
    int rc = twofold_growth_fit(fit, opts[m], series[s] + NDAYS - 28, NULL,
                                28, wd);
    res->fit_status[m] = rc;
    if (rc == 0) {
      res->fit[m][0] = twofold_fit_rate(fit);
      res->fit[m][1] = twofold_fit_rate_se(fit);
      twofold_fit_interval(fit, TWOFOLD_INTERVAL_DEFAULT, &res->fit[m][2],
                           &res->fit[m][3]);
      res->fit[m][4] = twofold_fit_theta(fit);
      res->fit[m][5] = twofold_fit_loglik(fit);
      res->fit[m][6] = twofold_fit_dispersion(fit);
      res->fit[m][7] = twofold_fit_intercept(fit);
    }
  }
  res->roll_rc = twofold_growth_roll(opts[s % 3], series[s], NULL, NDAYS,
                                     first_weekday[s], WINDOW,
                                     s % 2 ? TWOFOLD_ALIGN_CENTRED
                                           : TWOFOLD_ALIGN_TRAILING,
                                     res->rate, res->lo, res->hi,
                                     res->status);
  int kind = s % 24 == 8 ? 0 : 1 + s % 2; /* kink, jump, level */
  res->cp_rc = twofold_changes_run(ch, cpo[kind], series[s], NDAYS,
                                   first_weekday[s]);
  if (res->cp_rc == 0) {
    twofold_changes_p_change(ch, res->p_change);
    twofold_changes_growth(ch, res->g_mean, res->g_lo, res->g_hi);
    res->log_evidence = twofold_changes_log_evidence(ch);
    res->map_count = twofold_changes_map_count(ch);
  }
}

typedef struct worker {
  int id;
  result *out; /* NSERIES results */
  int failed;
} worker;

static void *work(void *arg) {
  worker *w = arg;
  twofold_fit_options *opts[3] = {NULL, NULL, NULL};
  twofold_fit *fit = NULL;
  twofold_cp_options *cpo[3] = {NULL, NULL, NULL};
  twofold_changes *ch = NULL;
  w->failed = twofold_fit_new(&fit) != 0 || twofold_changes_new(&ch) != 0;
  static const int kinds[3] = {TWOFOLD_CP_KINK, TWOFOLD_CP_JUMP,
                               TWOFOLD_CP_LEVEL};
  for (int k = 0; k < 3 && !w->failed; k++)
    w->failed = twofold_cp_options_new(&cpo[k]) != 0 ||
                twofold_cp_options_set_kind(cpo[k], kinds[k]) != 0;
  for (int m = 0; m < 3 && !w->failed; m++)
    w->failed = twofold_fit_options_new(&opts[m]) != 0 ||
                twofold_fit_options_set_model(opts[m], m) != 0;
  /* Each thread walks the series in its own order, so that different
   * series are fitted at the same moment. */
  for (int k = 0; k < NSERIES && !w->failed; k++) {
    int s = (k * 7 + w->id * 5) % NSERIES;
    run_series(s, opts, fit, cpo, ch, &w->out[s]);
  }
  for (int m = 0; m < 3; m++) {
    twofold_fit_options_free(opts[m]);
    twofold_cp_options_free(cpo[m]);
  }
  twofold_changes_free(ch);
  twofold_fit_free(fit);
  return NULL;
}

START_TEST(serial_reference_is_sane) {
  /* The serial run itself: most fits succeed, the all-zero series fails
   * with TWOFOLD_EZERO (header: "all counts in the window are zero"). */
  int ok = 0;
  for (int s = 0; s < NSERIES; s++)
    ok += serial[s].fit_status[2] == 0;
  ck_assert_int_ge(ok, NSERIES / 2);
  ck_assert_int_eq(serial[7].fit_status[0], TWOFOLD_EZERO);
  ck_assert_int_eq(serial[0].roll_rc, 0);
  /* changepoint posteriors ran (kink on series 8, jump on 1, level on 2)
   * and give probabilities */
  int cp_ok = 0;
  for (int s = 0; s < NSERIES; s++)
    cp_ok += serial[s].cp_rc == 0;
  ck_assert_int_ge(cp_ok, NSERIES / 2);
  ck_assert_int_eq(serial[8].cp_rc, 0);
  ck_assert_int_eq(serial[1].cp_rc, 0);
  ck_assert_int_eq(serial[2].cp_rc, 0);
  for (int t = 0; t < NDAYS; t++)
    ck_assert(serial[8].p_change[t] >= 0.0 && serial[8].p_change[t] <= 1.0);
}
END_TEST

START_TEST(eight_threads_match_serial) {
  pthread_t tid[NTHREADS];
  worker w[NTHREADS];
  for (int i = 0; i < NTHREADS; i++) {
    w[i].id = i;
    w[i].failed = 0;
    w[i].out = calloc(NSERIES, sizeof(result));
    ck_assert_ptr_nonnull(w[i].out);
  }
  for (int i = 0; i < NTHREADS; i++)
    ck_assert_int_eq(pthread_create(&tid[i], NULL, work, &w[i]), 0);
  for (int i = 0; i < NTHREADS; i++)
    ck_assert_int_eq(pthread_join(tid[i], NULL), 0);
  for (int i = 0; i < NTHREADS; i++) {
    ck_assert_int_eq(w[i].failed, 0);
    for (int s = 0; s < NSERIES; s++)
      ck_assert_msg(memcmp(&w[i].out[s], &serial[s], sizeof(result)) == 0,
                    "thread %d, series %d differs from the serial run", i, s);
    free(w[i].out);
  }
}
END_TEST

static void setup_serial(void) {
  make_series();
  worker w = {0, serial, 0};
  work(&w);
  ck_assert_int_eq(w.failed, 0);
}

int main(void) {
  Suite *suite = suite_create("threads");
  TCase *tc = tcase_create("growth");
  tcase_set_timeout(tc, 600);
  tcase_add_unchecked_fixture(tc, setup_serial, NULL);
  tcase_add_test(tc, serial_reference_is_sane);
  tcase_add_test(tc, eight_threads_match_serial);
  suite_add_tcase(suite, tc);
  SRunner *sr = srunner_create(suite);
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
