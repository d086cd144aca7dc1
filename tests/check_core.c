/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Unit tests: version, status codes, dates, series, sets and the total. */
#include "twofold.h"

#include <check.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* --- version ---------------------------------------------------------- */

START_TEST(version_agrees) {
  ck_assert_uint_eq(twofold_version(), TWOFOLD_VERSION_HEX);
  ck_assert_str_eq(twofold_version_string(), TWOFOLD_VERSION_STRING);
  char buf[32];
  snprintf(buf, sizeof buf, "%d.%d.%d", TWOFOLD_VERSION_MAJOR,
           TWOFOLD_VERSION_MINOR, TWOFOLD_VERSION_PATCH);
  ck_assert_str_eq(twofold_version_string(), buf);
  unsigned v = twofold_version();
  ck_assert_uint_eq(v >> 16, TWOFOLD_VERSION_MAJOR);
  ck_assert_uint_eq((v >> 8) & 0xff, TWOFOLD_VERSION_MINOR);
  ck_assert_uint_eq(v & 0xff, TWOFOLD_VERSION_PATCH);
}
END_TEST

/* --- status codes ------------------------------------------------------ */

START_TEST(status_names_and_messages) {
  ck_assert_str_eq(twofold_strerror(0), "success");
  ck_assert_str_eq(twofold_err_name(0), "TWOFOLD_OK");
  ck_assert_str_eq(twofold_err_name(TWOFOLD_EDATE), "TWOFOLD_EDATE");
  ck_assert_str_eq(twofold_strerror(TWOFOLD_ENOMEM), "out of memory");
  ck_assert_str_eq(twofold_strerror(12345), "unknown error");
  /* every code in the list is negative, distinct and has its own text */
  int codes[] = {
#define XX(n, v, t) v,
      TWOFOLD_ERRNO_MAP(XX)
#undef XX
  };
  size_t n = sizeof codes / sizeof codes[0];
  for (size_t i = 0; i < n; i++) {
    ck_assert_int_lt(codes[i], 0);
    ck_assert_int_gt(codes[i], TWOFOLD_E_LAST_);
    ck_assert_str_ne(twofold_strerror(codes[i]), "unknown error");
    for (size_t j = i + 1; j < n; j++)
      ck_assert_int_ne(codes[i], codes[j]);
  }
  ck_assert_uint_eq(twofold_error_size(), sizeof(twofold_error));
}
END_TEST

/* --- dates --------------------------------------------------------------- */

/* Known dates.  Day numbers relative to 1970-01-01 as POSIX time / 86400
 * (IEEE Std 1003.1, "Seconds Since the Epoch" formula); weekdays from the
 * ISO 8601 calendar (handbook facts, common practice, no further source). */
static const struct {
  const char *text;
  int32_t day;
  int weekday;
} known_dates[] = {
    {"1970-01-01", 0, 4},        /* Thursday */
    {"2000-01-01", 10957, 6},    /* Saturday */
    {"2000-02-29", 11016, 2},    /* Tuesday, 2000 is a leap year */
    {"2000-03-01", 11017, 3},
    {"1900-03-01", -25508, 4},   /* 1900 is not a leap year */
    {"2024-02-29", 19782, 4},    /* Thursday */
    {"2038-01-19", 24855, 2},    /* the 32-bit time_t rollover day */
    {"0001-01-01", TWOFOLD_DAY_MIN, 1}, /* Monday, proleptic */
    {"9999-12-31", TWOFOLD_DAY_MAX, 5}, /* Friday */
    {"1969-12-31", -1, 3},
    {"1582-10-15", -141427, 5},  /* first Gregorian day, a Friday */
};

START_TEST(date_known) {
  for (size_t i = 0; i < sizeof known_dates / sizeof known_dates[0]; i++) {
    int32_t d = 999999;
    ck_assert_int_eq(twofold_date_parse(known_dates[i].text, 10, &d), 0);
    ck_assert_int_eq(d, known_dates[i].day);
    ck_assert_int_eq(twofold_date_weekday(d), known_dates[i].weekday);
    char buf[11];
    ck_assert_int_eq(twofold_date_format(d, buf, sizeof buf), 0);
    ck_assert_str_eq(buf, known_dates[i].text);
  }
}
END_TEST

START_TEST(date_invalid) {
  static const char *bad[] = {
      "2023-02-29", "1900-02-29", "2024-13-01", "2024-00-10", "2024-04-31",
      "2024-01-00", "24-01-01",   "2024/01/01", "2024-1-01",  "20240101",
      "2024-01-01T", "0000-01-01", "2024-01-0a", " 2024-01-01", "",
      "2024-02-30"};
  for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
    int32_t d;
    ck_assert_msg(twofold_date_parse(bad[i], strlen(bad[i]), &d) ==
                      TWOFOLD_EDATE,
                  "accepted %s", bad[i]);
  }
  char buf[11];
  ck_assert_int_eq(twofold_date_format(TWOFOLD_DAY_MAX + 1, buf, sizeof buf),
                   TWOFOLD_ERANGE);
  ck_assert_int_eq(twofold_date_format(0, buf, 5), TWOFOLD_EINVAL);
}
END_TEST

START_TEST(date_round_trip_all) {
  /* every day in range: to_ymd then from_ymd is the identity, and each day
   * follows the previous one in the calendar.  Plain comparisons inside
   * the loop keep 3.6 million iterations fast; the first failure is
   * reported with its day. */
  int py = 0, pm = 0, pd = 0;
  int32_t bad = INT32_MIN;
  for (int32_t d = TWOFOLD_DAY_MIN; d <= TWOFOLD_DAY_MAX && bad == INT32_MIN;
       d++) {
    int y, m, md;
    int32_t back = INT32_MIN;
    if (twofold_date_to_ymd(d, &y, &m, &md) != 0 ||
        twofold_date_from_ymd(y, m, md, &back) != 0 || back != d)
      bad = d;
    if (d > TWOFOLD_DAY_MIN) {
      int next = (md == pd + 1 && m == pm && y == py) ||
                 (md == 1 && ((m == pm + 1 && y == py) ||
                              (m == 1 && pm == 12 && y == py + 1)));
      if (!next)
        bad = d;
    }
    py = y;
    pm = m;
    pd = md;
  }
  ck_assert_msg(bad == INT32_MIN, "calendar broken at day %d", (int)bad);
}
END_TEST

START_TEST(date_leap_years) {
  /* Gregorian rule: divisible by 4, except centuries not divisible by 400 */
  ck_assert_int_eq(twofold_date_is_leap(2000), 1);
  ck_assert_int_eq(twofold_date_is_leap(1900), 0);
  ck_assert_int_eq(twofold_date_is_leap(2100), 0);
  ck_assert_int_eq(twofold_date_is_leap(2024), 1);
  ck_assert_int_eq(twofold_date_is_leap(2023), 0);
  /* 146097 days in 400 years */
  int32_t a, b;
  twofold_date_from_ymd(2000, 1, 1, &a);
  twofold_date_from_ymd(2400, 1, 1, &b);
  ck_assert_int_eq(b - a, 146097);
}
END_TEST

/* --- series --------------------------------------------------------------- */

START_TEST(series_basics) {
  double v[6] = {3, NAN, 5, NAN, NAN, 7};
  twofold_series *s = NULL;
  ck_assert_int_eq(twofold_series_from_counts("Alder Vale", 100, v, 6,
                                              "cases", &s),
                   0);
  ck_assert_str_eq(twofold_series_region(s), "Alder Vale");
  ck_assert_int_eq(twofold_series_first_day(s), 100);
  ck_assert_uint_eq(twofold_series_length(s), 6);
  ck_assert_uint_eq(twofold_series_missing(s, 0), 3);
  ck_assert_double_eq(twofold_series_total(s, 0), 15.0);
  ck_assert_uint_eq(twofold_series_gaps(s, 0), 2);
  size_t st, len;
  ck_assert_int_eq(twofold_series_gap(s, 0, 1, &st, &len), 0);
  ck_assert_uint_eq(st, 3);
  ck_assert_uint_eq(len, 2);
  ck_assert_int_eq(twofold_series_gap(s, 0, 2, &st, &len), TWOFOLD_ENOTFOUND);
  ck_assert(isnan(twofold_series_values(s, 0)[1]));

  size_t idx;
  ck_assert_int_eq(twofold_series_add_column(s, "admissions", &idx), 0);
  ck_assert_uint_eq(idx, 1);
  ck_assert_int_eq(twofold_series_add_column(s, "admissions", &idx),
                   TWOFOLD_EDUPLICATE);
  ck_assert_int_eq(twofold_series_column_index(s, "admissions"), 1);
  ck_assert_int_eq(twofold_series_column_index(s, "deaths"),
                   TWOFOLD_ENOTFOUND);
  ck_assert_uint_eq(twofold_series_missing(s, 1), 6);
  ck_assert_int_eq(twofold_series_set(s, 1, 2, 4.0), 0);
  ck_assert_int_eq(twofold_series_set(s, 1, 2, -1.0), TWOFOLD_ECOUNT);
  ck_assert_int_eq(twofold_series_set(s, 1, 2, 1.5), TWOFOLD_ECOUNT);
  ck_assert_int_eq(twofold_series_set(s, 1, 2, INFINITY), TWOFOLD_ECOUNT);
  ck_assert_int_eq(twofold_series_set(s, 1, 2, 9007199254740994.0),
                   TWOFOLD_ECOUNT);
  ck_assert_int_eq(twofold_series_set(s, 1, 6, 1.0), TWOFOLD_EINVAL);
  ck_assert_double_eq(twofold_series_values(s, 1)[2], 4.0);

  twofold_series *c = NULL;
  ck_assert_int_eq(twofold_series_copy(s, &c), 0);
  ck_assert_uint_eq(twofold_series_columns(c), 2);
  ck_assert_double_eq(twofold_series_values(c, 1)[2], 4.0);
  ck_assert_str_eq(twofold_series_column_name(c, 1), "admissions");
  ck_assert_ptr_null(twofold_series_column_name(c, 2));
  twofold_series_free(c);
  twofold_series_free(s);
  twofold_series_free(NULL);

  double bad[2] = {1, -2};
  ck_assert_int_eq(twofold_series_from_counts("x", 0, bad, 2, "cases", &s),
                   TWOFOLD_ECOUNT);
  ck_assert_ptr_null(s);
}
END_TEST

/* --- sets and the total --------------------------------------------------- */

START_TEST(set_lookup_and_total) {
  twofold_set *set = NULL;
  ck_assert_int_eq(twofold_set_new(&set), 0);
  twofold_series *tmp = NULL;
  ck_assert_int_eq(twofold_set_total(set, "all", &tmp), TWOFOLD_EEMPTY);
  /* region A covers days 10..14, region B days 12..16, B misses day 13 */
  double a[5] = {1, 2, 3, 4, 5};
  double b[5] = {10, NAN, 30, 40, 50};
  twofold_series *sa, *sb, *sdup;
  twofold_series_from_counts("Aster Hollow", 10, a, 5, "cases", &sa);
  twofold_series_from_counts("Brindle Marsh", 12, b, 5, "cases", &sb);
  twofold_series_from_counts("Aster Hollow", 0, a, 1, "cases", &sdup);
  ck_assert_int_eq(twofold_set_add(set, sa), 0);
  ck_assert_int_eq(twofold_set_add(set, sb), 0);
  ck_assert_int_eq(twofold_set_add(set, sdup), TWOFOLD_EDUPLICATE);
  twofold_series_free(sdup);
  ck_assert_uint_eq(twofold_set_count(set), 2);
  ck_assert_ptr_eq(twofold_set_find(set, "Brindle Marsh"), sb);
  ck_assert_ptr_null(twofold_set_find(set, "Nowhere"));
  ck_assert_ptr_eq(twofold_set_at(set, 0), sa);
  ck_assert_ptr_null(twofold_set_at(set, 2));

  twofold_series *t = NULL;
  ck_assert_int_eq(twofold_set_total(set, "all regions", &t), 0);
  ck_assert_int_eq(twofold_series_first_day(t), 10);
  ck_assert_uint_eq(twofold_series_length(t), 7);
  const double *v = twofold_series_values(t, 0);
  /* only days 12 and 14 have both regions reporting */
  ck_assert(isnan(v[0]) && isnan(v[1]) && isnan(v[3]) && isnan(v[5]) &&
            isnan(v[6]));
  ck_assert_double_eq(v[2], 3 + 10);
  ck_assert_double_eq(v[4], 5 + 30);
  twofold_series_free(t);
  twofold_set_free(set);
  twofold_set_free(NULL);
}
END_TEST

START_TEST(set_many_regions) {
  twofold_set *set;
  twofold_set_new(&set);
  char name[32];
  for (int i = 0; i < 5000; i++) {
    twofold_series *s;
    double v = i;
    snprintf(name, sizeof name, "region-%d", i);
    ck_assert_int_eq(twofold_series_from_counts(name, 0, &v, 1, "cases", &s),
                     0);
    ck_assert_int_eq(twofold_set_add(set, s), 0);
  }
  for (int i = 0; i < 5000; i += 7) {
    snprintf(name, sizeof name, "region-%d", i);
    const twofold_series *s = twofold_set_find(set, name);
    ck_assert_ptr_nonnull(s);
    ck_assert_double_eq(twofold_series_values(s, 0)[0], i);
  }
  twofold_series *t;
  ck_assert_int_eq(twofold_set_total(set, "total", &t), 0);
  ck_assert_double_eq(twofold_series_values(t, 0)[0], 4999.0 * 5000 / 2);
  twofold_series_free(t);
  twofold_set_free(set);
}
END_TEST

static Suite *core_suite(void) {
  Suite *s = suite_create("core");
  TCase *tc = tcase_create("version");
  tcase_add_test(tc, version_agrees);
  tcase_add_test(tc, status_names_and_messages);
  suite_add_tcase(s, tc);
  tc = tcase_create("dates");
  tcase_add_test(tc, date_known);
  tcase_add_test(tc, date_invalid);
  tcase_add_test(tc, date_round_trip_all);
  tcase_add_test(tc, date_leap_years);
  tcase_set_timeout(tc, 60);
  suite_add_tcase(s, tc);
  tc = tcase_create("series");
  tcase_add_test(tc, series_basics);
  tcase_add_test(tc, set_lookup_and_total);
  tcase_add_test(tc, set_many_regions);
  suite_add_tcase(s, tc);
  return s;
}

int main(void) {
  SRunner *sr = srunner_create(core_suite());
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
