/* SPDX-License-Identifier: GPL-3.0-or-later */
/* The bad-input catalogue, at the library level.
 *
 * Files: every row of tests/bad-inputs/MANIFEST names a file, the status
 * the reader must return, the physical line it must report (0: not
 * checked) and a fragment of the message (the offending value).  The
 * reader must fail with that status, leave *out NULL, name the file in
 * err.file and err.text, report the line, and quote the value.  The
 * expectations come from the header's table of codes and the input
 * contract (errors name file, line and value), with lines counted by hand.
 *
 * API calls: arguments the header documents as errors, with the status it
 * documents ("nonzero" where it documents only that the call fails). */
#include "twofold.h"

#include <check.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct row {
  char file[128];
  char status[64];
  long line;
  char fragment[128];
} row;

static row rows[256];
static int nrows;
static const char *dir;

/* Split a tab-separated line into at most n fields (in place). */
static int split_tabs(char *s, char **f, int n) {
  int k = 0;
  f[k++] = s;
  for (char *p = s; *p && k < n; p++)
    if (*p == '\t') {
      *p = '\0';
      f[k++] = p + 1;
    }
  return k;
}

static void load_manifest(void) {
  char path[1024];
  snprintf(path, sizeof path, "%s/MANIFEST", dir);
  FILE *f = fopen(path, "r");
  if (!f) {
    fprintf(stderr, "FAIL: cannot open %s\n", path);
    exit(EXIT_FAILURE);
  }
  char line[1024];
  while (fgets(line, sizeof line, f)) {
    line[strcspn(line, "\r\n")] = '\0';
    if (line[0] == '#' || line[0] == '\0')
      continue;
    char *fld[5];
    if (split_tabs(line, fld, 5) < 4 || nrows == 256) {
      fprintf(stderr, "FAIL: bad MANIFEST line: %s\n", line);
      exit(EXIT_FAILURE);
    }
    row *r = &rows[nrows++];
    snprintf(r->file, sizeof r->file, "%s", fld[0]);
    snprintf(r->status, sizeof r->status, "%s", fld[1]);
    r->line = strtol(fld[2], NULL, 10);
    snprintf(r->fragment, sizeof r->fragment, "%s", fld[3]);
  }
  fclose(f);
}

START_TEST(bad_file) {
  const row *r = &rows[_i];
  char path[1024];
  snprintf(path, sizeof path, "%s/%s", dir, r->file);
  twofold_set *set = (twofold_set *)&set; /* must be set to NULL */
  twofold_error err;
  memset(&err, 0, sizeof err);
  int rc = twofold_read_file(path, NULL, &set, &err);
  ck_assert_msg(rc < 0, "%s: read succeeded", r->file);
  ck_assert_msg(set == NULL, "%s: *out not NULL after failure", r->file);
  ck_assert_msg(strcmp(twofold_err_name(rc), r->status) == 0,
                "%s: status %s, expected %s (%s)", r->file,
                twofold_err_name(rc), r->status, err.text);
  ck_assert_int_eq(err.code, rc);
  ck_assert_msg(strstr(err.file, r->file) != NULL,
                "%s: err.file is '%s'", r->file, err.file);
  ck_assert_msg(strstr(err.text, r->file) != NULL,
                "%s: message does not name the file: %s", r->file, err.text);
  if (r->line > 0) {
    ck_assert_msg(err.line == r->line, "%s: line %ld, expected %ld (%s)",
                  r->file, err.line, r->line, err.text);
    char at[160];
    snprintf(at, sizeof at, "%s:%ld:", r->file, r->line);
    ck_assert_msg(strstr(err.text, at) != NULL,
                  "%s: message lacks '%s': %s", r->file, at, err.text);
  }
  ck_assert_msg(strstr(err.text, r->fragment) != NULL,
                "%s: message lacks the value '%s': %s", r->file, r->fragment,
                err.text);
}
END_TEST

/* --- API calls --------------------------------------------------------- */

#define NONZERO 1
#define EXPECT(call, want)                                                   \
  do {                                                                       \
    int rc_ = (call);                                                        \
    if ((want) == NONZERO)                                                   \
      ck_assert_msg(rc_ < 0, "%s returned %d, expected an error", #call,      \
                    rc_);                                                    \
    else                                                                     \
      ck_assert_msg(rc_ == (want), "%s returned %s, expected %s", #call,      \
                    twofold_err_name(rc_), twofold_err_name(want));          \
    ncalls++;                                                                \
  } while (0)

START_TEST(bad_calls) {
  int ncalls = 0;
  int32_t day;
  int y, m, d;
  EXPECT(twofold_date_from_ymd(2021, 2, 29, &day), TWOFOLD_EDATE);
  EXPECT(twofold_date_from_ymd(2020, 13, 1, &day), TWOFOLD_EDATE);
  EXPECT(twofold_date_from_ymd(2020, 4, 31, &day), TWOFOLD_EDATE);
  EXPECT(twofold_date_to_ymd(TWOFOLD_DAY_MAX + 1, &y, &m, &d), TWOFOLD_ERANGE);
  EXPECT(twofold_date_to_ymd(TWOFOLD_DAY_MIN - 1, &y, &m, &d), TWOFOLD_ERANGE);
  EXPECT(twofold_date_parse("2020-1-01", 9, &day), TWOFOLD_EDATE);
  EXPECT(twofold_date_parse("2020-01-01", 9, &day), TWOFOLD_EDATE);

  twofold_series *s = NULL;
  ck_assert_int_eq(twofold_series_new("North Vale", 18000, 10, "cases", &s), 0);
  EXPECT(twofold_series_set(s, 0, 0, -1.0), TWOFOLD_ECOUNT);
  EXPECT(twofold_series_set(s, 0, 0, 0.5), TWOFOLD_ECOUNT);
  EXPECT(twofold_series_set(s, 0, 0, INFINITY), TWOFOLD_ECOUNT);
  EXPECT(twofold_series_set(s, 0, 0, 9007199254740994.0), TWOFOLD_ECOUNT);
  EXPECT(twofold_series_set(s, 0, 10, 1.0), NONZERO);
  EXPECT(twofold_series_set(s, 1, 0, 1.0), NONZERO);
  EXPECT(twofold_series_column_index(s, "admissions"), TWOFOLD_ENOTFOUND);
  size_t a, b;
  EXPECT(twofold_series_gap(s, 0, 1, &a, &b), TWOFOLD_ENOTFOUND);
  double bad[3] = {1, -2, 3};
  twofold_series *t = NULL;
  EXPECT(twofold_series_from_counts("x", 0, bad, 3, "cases", &t),
         TWOFOLD_ECOUNT);
  ck_assert_ptr_null(t);

  twofold_set *set = NULL, *empty = NULL;
  ck_assert_int_eq(twofold_set_new(&set), 0);
  ck_assert_int_eq(twofold_set_new(&empty), 0);
  ck_assert_int_eq(twofold_set_add(set, s), 0);
  twofold_series *s2 = NULL;
  ck_assert_int_eq(twofold_series_new("North Vale", 18000, 3, "cases", &s2),
                   0);
  EXPECT(twofold_set_add(set, s2), TWOFOLD_EDUPLICATE);
  twofold_series_free(s2);
  twofold_series *tot = NULL;
  EXPECT(twofold_set_total(empty, "all", &tot), TWOFOLD_EEMPTY);
  twofold_set_free(set);
  twofold_set_free(empty);

  EXPECT(twofold_layout_from_string("diagonal"), TWOFOLD_EINVAL);
  EXPECT(twofold_model_from_string("normal"), TWOFOLD_EINVAL);
  EXPECT(twofold_interval_from_string(""), TWOFOLD_EINVAL);
  EXPECT(twofold_align_from_string("left"), TWOFOLD_EINVAL);

  twofold_read_options *ro = NULL;
  ck_assert_int_eq(twofold_read_options_new(&ro), 0);
  EXPECT(twofold_read_options_set_layout(ro, 7), TWOFOLD_EINVAL);
  twofold_read_options_free(ro);
  twofold_set *out = NULL;
  twofold_error err;
  EXPECT(twofold_read_file("/nonexistent/dir/cases.csv", NULL, &out, &err),
         TWOFOLD_EIO);
  ck_assert_ptr_null(out);
  ck_assert_ptr_nonnull(strstr(err.text, "/nonexistent/dir/cases.csv"));

  twofold_fit_options *fo = NULL;
  ck_assert_int_eq(twofold_fit_options_new(&fo), 0);
  EXPECT(twofold_fit_options_set_level(fo, 1.0), NONZERO);
  EXPECT(twofold_fit_options_set_level(fo, 0.0), NONZERO);
  EXPECT(twofold_fit_options_set_level(fo, NAN), NONZERO);
  EXPECT(twofold_fit_options_set_model(fo, 3), NONZERO);
  EXPECT(twofold_fit_options_set_interval(fo, 4), NONZERO);
  twofold_fit *fit = NULL;
  ck_assert_int_eq(twofold_fit_new(&fit), 0);
  double zeros[21] = {0};
  EXPECT(twofold_growth_fit(fit, fo, zeros, NULL, 21, 1), TWOFOLD_EZERO);
  ck_assert_int_eq(twofold_fit_status(fit), TWOFOLD_EZERO);
  ck_assert_str_ne(twofold_fit_errmsg(fit), "");
  double ys[21];
  for (int i = 0; i < 21; i++)
    ys[i] = 10 + i;
  EXPECT(twofold_growth_fit(fit, fo, ys, NULL, 21, 0), NONZERO);
  EXPECT(twofold_growth_fit(fit, fo, ys, NULL, 21, 8), NONZERO);
  twofold_fit_free(fit);
  twofold_fit_options_free(fo);

  twofold_gi *gi = NULL;
  ck_assert_int_eq(twofold_gi_new_gamma(5.0, 2.5, &gi), 0);
  double R;
  /* gamma shape (5/2.5)^2 = 4, rate 5/2.5^2 = 0.8: M(-r) needs r > -0.8 */
  EXPECT(twofold_gi_reproduction(gi, -1.0, &R), TWOFOLD_ERANGE);
  twofold_gi_free(gi);
  EXPECT(twofold_gi_new_gamma(-1.0, 2.0, &gi), NONZERO);
  EXPECT(twofold_gi_new_gamma(5.0, 0.0, &gi), NONZERO);
  printf("bad_calls: %d API calls checked\n", ncalls);
}
END_TEST

int main(void) {
  dir = getenv("BAD_INPUTS_DIR");
  static char buf[1024];
  if (!dir) {
    const char *top = getenv("top_srcdir");
    snprintf(buf, sizeof buf, "%s/tests/bad-inputs", top ? top : ".");
    dir = buf;
  }
  load_manifest();
  printf("bad inputs: %d files in %s/MANIFEST\n", nrows, dir);
  Suite *suite = suite_create("bad_inputs");
  TCase *tc = tcase_create("files");
  tcase_add_loop_test(tc, bad_file, 0, nrows);
  suite_add_tcase(suite, tc);
  TCase *tc2 = tcase_create("calls");
  tcase_add_test(tc2, bad_calls);
  suite_add_tcase(suite, tc2);
  SRunner *sr = srunner_create(suite);
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
