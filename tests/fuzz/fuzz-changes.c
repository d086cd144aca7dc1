/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Fuzz harness for the changepoint entry points: twofold_changes_run and
 * its getters, sampling, the building blocks, and the online filter, on
 * series and options decoded from the bytes.
 *
 * Layout (missing bytes read as zero): kind, changes per year, minimum
 * segment, length shape, rate prior (2 bytes), level prior (2 bytes),
 * dispersion, weekday flag, pruning, maximum changes, level, grid: one
 * byte each, mapped through tables that include invalid values; first
 * weekday (0..8), online candidates, history length (1 byte each), length
 * (2 bytes, at most MAX_DAYS); then one tag byte per day as in fuzz-fit.c.
 * Besides the sanitizers it checks the header's promises: status and
 * message kept in the handle, probabilities in [0, 1], p[0] = 0,
 * intervals ordered, doubling times never negative or NaN, the MAP
 * segmentation consistent, the same seed giving the same draws. */
#include "fuzz.h"
#include "twofold.h"

#include <math.h>
#include <string.h>

#define MAX_DAYS 100
#define EPS 1e-9

static const double per_year[] = {4, 1, 12, 0.01, 0, -1, NAN, 52, 1e6, 365};
static const int min_seg[] = {7, 1, 2, 3, 0, -1, 30, 1000, 14};
static const int shapes[] = {2, 1, 5, 50, 0, 51, -3};
static const double means[] = {0, 0.1, -0.2, NAN, INFINITY, 5};
static const double sds[] = {0.1, 0.01, 1, 0, -1, NAN, 1e-12, 100};
static const double alphas[] = {1, 0.5, 10, 0, -1, NAN, 1e-8, 1e8};
static const double betas[] = {0, 1, 0.01, -1, NAN, INFINITY, 1e6};
static const double disps[] = {0, 1, 2.5, 0.5, NAN, INFINITY, 1e6};
static const double prunes[] = {1e-10, 0, 1e-3, 1e-2, NAN, 1e-6};
static const int maxch[] = {20, 0, 1, 5, 1000, 1001, -1};
static const double levels[] = {0.95, 0.5, 0.0, 1.0, NAN, 0.99};
/* KINK methods: 0 (Laplace messages, the default) and small grids; the
 * grid method's cost grows as points^2 x days x candidates, so large
 * valid grids (up to 200) are slow by design rather than wrong and are
 * left to tests/check_changes.c; 3 and 201 are invalid. */
static const int grids[] = {0, 16, 4, 8, 3, 0, 201, -1};

#define PICK(tab, b) (tab[(b) % (sizeof tab / sizeof tab[0])])

static double count_value(fuzz_bytes *b, double prev) {
  uint8_t tag = fuzz_u8(b);
  switch (tag & 15) {
  case 0: return NAN;
  case 1: return 0.0;
  case 2: return (double)fuzz_u16(b);
  case 3: return (double)fuzz_u32(b);
  case 4: return 9007199254740992.0;
  case 5: return 9007199254740994.0;
  case 6: return INFINITY;
  case 7: return -1.0;
  case 8: return 1.5;
  case 10: return prev;
  case 11: {
    uint64_t u = fuzz_u64(b);
    double v;
    memcpy(&v, &u, sizeof v);
    return v;
  }
  case 12: return 1e15 + (double)fuzz_u8(b);
  default: return (double)(tag >> 4) + (double)fuzz_u8(b);
  }
}

static int is_prob(double p) { return p >= -EPS && p <= 1 + EPS; }

static void check_times(const double *t, const double *lo, const double *hi,
                        const int *sense, size_t n) {
  for (size_t i = 0; i < n; i++) {
    FUZZ_CHECK(!isnan(t[i]) && t[i] >= 0);
    FUZZ_CHECK(!isnan(lo[i]) && lo[i] >= 0);
    FUZZ_CHECK(!isnan(hi[i]) && hi[i] >= 0);
    FUZZ_CHECK(sense[i] >= -1 && sense[i] <= 1);
  }
}

static void check_run(const twofold_changes *ch, int rc, size_t n) {
  FUZZ_CHECK(rc <= 0 && rc > TWOFOLD_E_LAST_);
  FUZZ_CHECK(twofold_changes_status(ch) == rc);
  const char *msg = twofold_changes_errmsg(ch);
  FUZZ_CHECK(msg != NULL && (rc == 0) == (msg[0] == '\0'));
  if (rc != 0) {
    FUZZ_CHECK(twofold_changes_p_change(ch, NULL) != 0);
    return;
  }
  FUZZ_CHECK(twofold_changes_length(ch) == n);
  (void)twofold_changes_kind(ch);
  (void)twofold_changes_dispersion(ch);
  for (int d = 0; d <= 8; d++)
    (void)twofold_changes_weekday_effect(ch, d);
  (void)twofold_changes_log_evidence(ch);
  double *p = malloc(n * sizeof *p), *m = malloc(n * sizeof *m),
         *lo = malloc(n * sizeof *lo), *hi = malloc(n * sizeof *hi);
  int *sense = malloc(n * sizeof *sense);
  if (!p || !m || !lo || !hi || !sense)
    goto out;
  FUZZ_CHECK(twofold_changes_p_change(ch, p) == 0);
  FUZZ_CHECK(p[0] == 0);
  for (size_t i = 0; i < n; i++)
    FUZZ_CHECK(is_prob(p[i]));
  FUZZ_CHECK(twofold_changes_growth(ch, m, lo, hi) == 0);
  for (size_t i = 0; i < n; i++)
    FUZZ_CHECK(!(lo[i] > hi[i]));
  FUZZ_CHECK(twofold_changes_growth(ch, NULL, NULL, NULL) == 0);
  if (twofold_changes_doubling(ch, m, lo, hi, sense) == 0)
    check_times(m, lo, hi, sense, n);
  double cp[32], tail = -1;
  FUZZ_CHECK(twofold_changes_count_prob(ch, cp, 32, &tail) <= 0);
  FUZZ_CHECK(twofold_changes_count_prob(ch, cp, 0, NULL) <= 0);
  (void)twofold_changes_count_mean(ch);
  size_t k = twofold_changes_map_count(ch);
  FUZZ_CHECK(k < n);
  size_t prev_day = 0;
  for (size_t j = 0; j < k; j++) {
    size_t day = 0, from = 0, to = 0;
    double prob = -1;
    FUZZ_CHECK(twofold_changes_map_change(ch, j, &day, &from, &to, &prob) ==
               0);
    FUZZ_CHECK(day > prev_day && day < n);
    FUZZ_CHECK(from <= day && day <= to && to < n);
    FUZZ_CHECK(is_prob(prob));
    prev_day = day;
  }
  FUZZ_CHECK(twofold_changes_map_change(ch, k, NULL, NULL, NULL, NULL) ==
             TWOFOLD_ENOTFOUND);
  size_t next = 0;
  for (size_t j = 0; j <= k; j++) {
    size_t start = 0, end = 0;
    double r, rl, rh, level;
    FUZZ_CHECK(twofold_changes_map_segment(ch, j, &start, &end, &r, &rl, &rh,
                                           &level) == 0);
    FUZZ_CHECK(start == next && start <= end && end < n);
    FUZZ_CHECK(!(rl > rh));
    next = end + 1;
  }
  FUZZ_CHECK(next == n);
  FUZZ_CHECK(twofold_changes_map_segment(ch, k + 1, NULL, NULL, NULL, NULL,
                                         NULL, NULL) == TWOFOLD_ENOTFOUND);
  /* Sampling: the same seed gives the same draws. */
  enum { DRAWS = 3 };
  unsigned char *c1 = malloc(DRAWS * n), *c2 = malloc(DRAWS * n);
  size_t n1[DRAWS], n2[DRAWS];
  if (c1 && c2) {
    int s1 = twofold_changes_sample(ch, 42, DRAWS, c1, NULL, n1);
    int s2 = twofold_changes_sample(ch, 42, DRAWS, c2, NULL, n2);
    FUZZ_CHECK(s1 == s2);
    if (s1 == 0) {
      FUZZ_CHECK(memcmp(c1, c2, DRAWS * n) == 0);
      FUZZ_CHECK(memcmp(n1, n2, sizeof n1) == 0);
      for (size_t d = 0; d < DRAWS; d++)
        FUZZ_CHECK(c1[d * n] == 0);
    }
    (void)twofold_changes_sample(ch, 7, 0, NULL, NULL, NULL);
  }
  free(c1);
  free(c2);
  /* Building blocks, in and out of range. */
  double v, w;
  (void)twofold_changes_segment_logml(ch, 0, n - 1, &v);
  (void)twofold_changes_segment_logml(ch, n - 1, 0, &v);
  (void)twofold_changes_segment_logml(ch, 0, n, &v);
  (void)twofold_changes_length_prior(ch, n, 1, &v, &w);
  (void)twofold_changes_length_prior(ch, 0, 0, &v, &w);
  (void)twofold_changes_length_prior(ch, (size_t)-1, 0, &v, &w);
out:
  free(p);
  free(m);
  free(lo);
  free(hi);
  free(sense);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  fuzz_bytes b = {data, size};
  twofold_cp_options *o = NULL;
  if (twofold_cp_options_new(&o) != 0)
    return 0;
  int kind = fuzz_u8(&b) % 4;
  FUZZ_CHECK((twofold_cp_options_set_kind(o, kind) == 0) == (kind < 3));
  (void)twofold_cp_options_set_changes_per_year(o,
                                                PICK(per_year, fuzz_u8(&b)));
  (void)twofold_cp_options_set_min_segment(o, PICK(min_seg, fuzz_u8(&b)));
  (void)twofold_cp_options_set_length_shape(o, PICK(shapes, fuzz_u8(&b)));
  uint8_t rp = fuzz_u8(&b);
  (void)twofold_cp_options_set_rate_prior(o, PICK(means, rp), PICK(sds, rp >> 4));
  uint8_t lp = fuzz_u8(&b);
  (void)twofold_cp_options_set_level_prior(o, PICK(alphas, lp),
                                           PICK(betas, lp >> 4));
  (void)twofold_cp_options_set_dispersion(o, PICK(disps, fuzz_u8(&b)));
  (void)twofold_cp_options_set_weekday(o, fuzz_u8(&b) & 1);
  (void)twofold_cp_options_set_prune(o, PICK(prunes, fuzz_u8(&b)));
  (void)twofold_cp_options_set_max_changes(o, PICK(maxch, fuzz_u8(&b)));
  double level = PICK(levels, fuzz_u8(&b));
  int lrc = twofold_cp_options_set_level(o, level);
  FUZZ_CHECK((level > 0 && level < 1) ? lrc == 0 : lrc < 0);
  (void)twofold_cp_options_set_grid(o, PICK(grids, fuzz_u8(&b)));
  FUZZ_CHECK(twofold_cp_options_errmsg(o) != NULL);
  int first_weekday = fuzz_u8(&b) % 9;
  size_t cand = fuzz_u8(&b) % 40;
  size_t nhist = fuzz_u8(&b) % 64;
  size_t n = fuzz_u16(&b) % (MAX_DAYS + 1);

  double *y = malloc((n ? n : 1) * sizeof *y);
  twofold_changes *ch = NULL;
  if (!y || twofold_changes_new(&ch) != 0)
    goto done;
  double prev = 0;
  for (size_t i = 0; i < n; i++)
    prev = y[i] = count_value(&b, prev);

  int rc = twofold_changes_run(ch, o, n ? y : NULL, n, first_weekday);
  if (first_weekday < 1 || first_weekday > 7)
    FUZZ_CHECK(rc != 0);
  check_run(ch, rc, n);
  /* The same run again into the used handle: the same evidence. */
  double ev = twofold_changes_log_evidence(ch);
  int rc2 = twofold_changes_run(ch, o, n ? y : NULL, n, first_weekday);
  FUZZ_CHECK(rc2 == rc);
  if (rc == 0)
    FUZZ_CHECK(memcmp(&ev, &(double){twofold_changes_log_evidence(ch)},
                      sizeof ev) == 0 || isnan(ev));

  /* Online: the first nhist days as history, the rest added one by
   * one. */
  if (nhist > n)
    nhist = n;
  twofold_online *on = NULL;
  int orc = twofold_online_new(o, nhist ? y : NULL, nhist, first_weekday,
                               cand, 99, &on);
  FUZZ_CHECK((orc == 0) == (on != NULL));
  if (on) {
    for (size_t i = nhist; i < n; i++) {
      if (twofold_online_add(on, y[i]) != 0)
        break;
      double p = -1, m, lo, hi;
      if (twofold_online_p_recent(on, 1 + i % 10, &p) == 0)
        FUZZ_CHECK(is_prob(p));
      if (twofold_online_growth(on, &m, &lo, &hi) == 0)
        FUZZ_CHECK(!(lo > hi));
      (void)twofold_online_log_predictive(on);
      FUZZ_CHECK(twofold_online_candidates(on) <= (cand < 2 ? 2 : cand) ||
                 cand < 2);
    }
    (void)twofold_online_p_recent(on, 0, NULL);
    (void)twofold_online_days(on);
    FUZZ_CHECK(twofold_online_errmsg(on) != NULL);
    twofold_online_free(on);
  }

done:
  twofold_changes_free(ch);
  free(y);
  twofold_cp_options_free(o);
  return 0;
}
