/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Unit tests of the CSV reader.  The expected behaviour comes from the
 * formats' own specifications, not from the reader's output:
 *  - CSV quoting, CRLF and field rules: RFC 4180 (Shafranovich 2005);
 *  - gzip members and their concatenation: RFC 1952 section 2.2, with the
 *    compressed test data made by zlib's own deflate (gzip wrapper);
 *  - UTF-8 validity (overlongs, surrogates): RFC 3629 section 4;
 *  - ISO 8601 calendar dates and leap years: the Gregorian rules;
 *  - 2^53 = 9007199254740992, the largest integer up to which IEEE 754
 *    binary64 holds every integer exactly.
 * Line and column numbers are counted by hand from the inputs below.
 */
#include "twofold.h"

#include <check.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <zlib.h>

#define NAME "t.csv"
#define H "region,date,cases\n"

static int read_str(const char *csv, size_t len, const twofold_read_options *o,
                    twofold_set **out, twofold_error *err) {
  return twofold_read_memory(csv, len ? len : strlen(csv), NAME, o, out, err);
}

static int32_t day_of(const char *iso) {
  int32_t d;
  ck_assert_int_eq(twofold_date_parse(iso, strlen(iso), &d), 0);
  return d;
}

/* gzip-compress n bytes with zlib's deflate (gzip wrapper: windowBits
 * 15 + 16).  Caller frees. */
static unsigned char *gzip_level(const void *src, size_t n, size_t *outn,
                                 int level) {
  z_stream z;
  memset(&z, 0, sizeof z);
  ck_assert_int_eq(
      deflateInit2(&z, level, Z_DEFLATED, 15 + 16, 8, Z_DEFAULT_STRATEGY),
      Z_OK);
  size_t cap = deflateBound(&z, (uLong)n) + 64;
  unsigned char *out = malloc(cap);
  ck_assert_ptr_nonnull(out);
  z.next_in = (unsigned char *)(uintptr_t)src;
  z.avail_in = (uInt)n;
  z.next_out = out;
  z.avail_out = (uInt)cap;
  ck_assert_int_eq(deflate(&z, Z_FINISH), Z_STREAM_END);
  *outn = z.total_out;
  deflateEnd(&z);
  return out;
}

static unsigned char *gzip_bytes(const void *src, size_t n, size_t *outn) {
  return gzip_level(src, n, outn, 6);
}

/* ---------------------------------------------------------------------- */
/* Malformed inputs: exact code, line, column; text names file and value  */
/* ---------------------------------------------------------------------- */

struct bad {
  const char *what;
  const char *csv;
  size_t len; /* 0: strlen */
  int layout;
  const char *region, *date, *count; /* NULL: default */
  int code;
  long line, column;
  const char *needle; /* must appear in err.text (the offending value) */
  const char *needle2;
};

static const struct bad bad[] = {
    {"long layout without the region column", "place,date,cases\nA,2020-01-01,1\n",
     0, TWOFOLD_LAYOUT_LONG, NULL, NULL, NULL, TWOFOLD_ECOLUMN, 1, 0,
     "\"region\"", "\"place\""},
    {"auto layout with neither column", "place,day,cases\nA,2020-01-01,1\n", 0,
     TWOFOLD_LAYOUT_AUTO, NULL, NULL, NULL, TWOFOLD_ECOLUMN, 1, 0,
     "\"region\"", "\"date\""},
    {"long layout without the date column", "region,day,cases\nA,2020-01-01,1\n",
     0, 0, NULL, NULL, NULL, TWOFOLD_ECOLUMN, 1, 0, "\"date\"", "\"day\""},
    {"chosen count column absent", H "A,2020-01-01,1\n", 0, 0, NULL, NULL,
     "deaths", TWOFOLD_ECOLUMN, 1, 0, "\"deaths\"", NULL},
    {"no count column at all", "region,date\nA,2020-01-01\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_ECOLUMN, 1, 0, "no count column", "\"date\""},
    {"29 February in a common year", H "A,2020-01-01,1\nA,2021-02-29,2\n", 0,
     0, NULL, NULL, NULL, TWOFOLD_EDATE, 3, 2, "\"2021-02-29\"", "\"date\""},
    {"non-ISO date", H "A,03/01/2020,1\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EDATE, 2, 2, "\"03/01/2020\"", NULL},
    {"date without zero padding", H "A,2020-1-05,1\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EDATE, 2, 2, "\"2020-1-05\"", NULL},
    {"date with a trailing space", H "A,2020-01-05 ,1\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_EDATE, 2, 2, "\"2020-01-05 \"", NULL},
    {"month 13", H "A,2020-01-01,1\nA,2020-13-01,1\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EDATE, 3, 2, "\"2020-13-01\"", NULL},
    {"year 0000", H "A,0000-01-01,1\n", 0, 0, NULL, NULL, NULL, TWOFOLD_EDATE,
     2, 2, "\"0000-01-01\"", NULL},
    {"31 April", H "A,2020-04-30,1\nA,2020-04-31,1\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EDATE, 3, 2, "\"2020-04-31\"", NULL},
    {"duplicate region and date",
     H "A,2020-01-01,1\nB,2020-01-01,1\nA,2020-01-01,2\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_EDUPLICATE, 4, 2, "line 2", "\"A\""},
    {"negative count", H "A,2020-01-01,-4\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_ECOUNT, 2, 3, "\"-4\"", "negative"},
    {"fractional count", H "A,2020-01-01,2.5\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_ECOUNT, 2, 3, "\"2.5\"", "\"cases\""},
    {"count with a decimal zero", H "A,2020-01-01,12.0\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_ECOUNT, 2, 3, "\"12.0\"", NULL},
    {"count in exponent form", H "A,2020-01-01,1e3\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_ECOUNT, 2, 3, "\"1e3\"", NULL},
    {"non-numeric count", H "A,2020-01-01,1\nA,2020-01-02,abc\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_ECOUNT, 3, 3, "\"abc\"", NULL},
    {"count with a leading space", H "A,2020-01-01, 5\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_ECOUNT, 2, 3, "\" 5\"", NULL},
    {"count with a trailing space", H "A,2020-01-01,5 \n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_ECOUNT, 2, 3, "\"5 \"", NULL},
    {"count with a plus sign", H "A,2020-01-01,+5\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_ECOUNT, 2, 3, "\"+5\"", NULL},
    {"count 2^53 + 1", H "A,2020-01-01,9007199254740993\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_ECOUNT, 2, 3, "\"9007199254740993\"", "2^53"},
    {"count of 23 digits", H "A,2020-01-01,99999999999999999999999\n", 0, 0,
     NULL, NULL, NULL, TWOFOLD_ECOUNT, 2, 3, "\"99999999999999999999999\"",
     NULL},
    {"too many fields", H "A,2020-01-01,1\nA,2020-01-02,1,9\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_EFIELDS, 3, 4, "\"A,2020-01-02,1,9\"", NULL},
    {"too few fields", H "A,2020-01-01\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EFIELDS, 2, 3, "\"A,2020-01-01\"", NULL},
    {"empty file", "", 0, 0, NULL, NULL, NULL, TWOFOLD_EEMPTY, 1, 0,
     "no header", NULL},
    {"byte-order mark only", "\xef\xbb\xbf", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EEMPTY, 1, 0, "no header", NULL},
    {"header without data rows", H, 0, 0, NULL, NULL, NULL, TWOFOLD_EEMPTY, 1,
     0, "no data rows", NULL},
    {"NUL byte in a region name", H "A,2020-01-01,1\nB\0x,2020-01-02,1\n",
     sizeof(H "A,2020-01-01,1\nB\0x,2020-01-02,1\n") - 1, 0, NULL, NULL, NULL,
     TWOFOLD_EENCODING, 3, 1, "NUL", NULL},
    {"NUL byte in a quoted field", H "\"A\0\",2020-01-01,1\n",
     sizeof(H "\"A\0\",2020-01-01,1\n") - 1, 0, NULL, NULL, NULL,
     TWOFOLD_EENCODING, 2, 1, "NUL", NULL},
    {"invalid UTF-8 region name", H "\xff\xfe,2020-01-01,1\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_EENCODING, 2, 1, "\"\\xff\\xfe\"", NULL},
    {"overlong UTF-8 (RFC 3629)", H "A,2020-01-01,1\nx\xc0\xafy,2020-01-01,1\n",
     0, 0, NULL, NULL, NULL, TWOFOLD_EENCODING, 3, 1, "\"x\\xc0\\xafy\"", NULL},
    {"UTF-8 surrogate (RFC 3629)", H "\xed\xa0\x80,2020-01-01,1\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_EENCODING, 2, 1, "\\xed\\xa0\\x80", NULL},
    {"truncated UTF-8 sequence", H "Z\xc3,2020-01-01,1\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_EENCODING, 2, 1, "\"Z\\xc3\"", NULL},
    {"invalid UTF-8 in the header", "region,date,ca\xffses\nA,2020-01-01,1\n", 0,
     0, NULL, NULL, NULL, TWOFOLD_EENCODING, 1, 3, "\"ca\\xffses\"", NULL},
    {"unterminated quote at end of input",
     H "A,2020-01-01,1\n\"B,2020-01-02,1\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EPARSE, 3, 1, "\\\"B,2020-01-02", NULL},
    {"duplicate column names", "region,date,cases,cases\nA,2020-01-01,1,2\n", 0,
     0, NULL, NULL, NULL, TWOFOLD_EDUPLICATE, 1, 4, "\"cases\"", NULL},
    {"empty region name", H ",2020-01-01,1\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EPARSE, 2, 1, "empty region name", NULL},
    {"quoted empty region name", H "A,2020-01-01,1\n\"\",2020-01-01,1\n", 0, 0,
     NULL, NULL, NULL, TWOFOLD_EPARSE, 3, 1, "empty region name", NULL},
    {"quote inside an unquoted field", H "A\"b,2020-01-01,1\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_EPARSE, 2, 1, "\"A\\\"b", NULL},
    {"text after a closing quote", H "\"A\"b,2020-01-01,1\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_EPARSE, 2, 1, "\"\\\"A\\\"b", NULL},
    {"bare carriage return", H "A\rB,2020-01-01,1\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_EPARSE, 2, 1, "\"A\\rB", NULL},
    {"wide layout, bad count", "date,North,South\n2020-01-01,1,2\n2020-01-02,3,x\n",
     0, 0, NULL, NULL, NULL, TWOFOLD_ECOUNT, 3, 3, "\"x\"", "\"South\""},
    {"wide layout, duplicate date", "date,North\n2020-01-01,1\n2020-01-01,2\n",
     0, 0, NULL, NULL, NULL, TWOFOLD_EDUPLICATE, 3, 1, "\"2020-01-01\"",
     "line 2"},
    {"wide layout, duplicate region", "date,North,North\n2020-01-01,1,2\n", 0,
     0, NULL, NULL, NULL, TWOFOLD_EDUPLICATE, 1, 3, "\"North\"", NULL},
    {"wide layout without region columns", "date\n2020-01-01\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_ECOLUMN, 1, 0, "\"date\"", NULL},
    {"wide layout, bad date", "date,North\n2020-01-01,1\n2020-02-30,2\n", 0,
     TWOFOLD_LAYOUT_WIDE, NULL, NULL, NULL, TWOFOLD_EDATE, 3, 1,
     "\"2020-02-30\"", NULL},
    {"line count after a quoted line break",
     H "\"A\nB\",2020-01-01,1\n\"C\",2020-01-02,x\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_ECOUNT, 4, 3, "\"x\"", NULL},
    {"line count with CRLF",
     "region,date,cases\r\nA,2020-01-01,1\r\nA,2020-01-02,-1\r\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_ECOUNT, 3, 3, "\"-1\"", NULL},
    {"line count over skipped empty lines",
     H "\nA,2020-01-01,1\n\nA,2020-01-02,z\n", 0, 0, NULL, NULL, NULL,
     TWOFOLD_ECOUNT, 5, 3, "\"z\"", NULL},
    {"byte-order mark, then a header without the region column",
     "\xef\xbb\xbfplace,date,cases\nA,2020-01-01,1\n", 0, TWOFOLD_LAYOUT_LONG,
     NULL, NULL, NULL, TWOFOLD_ECOLUMN, 1, 0, "\"region\"", "\"place\""},
    {"bad value in a further count column",
     "region,date,cases,admissions\nA,2020-01-01,1,2.5\n", 0, 0, NULL, NULL,
     NULL, TWOFOLD_ECOUNT, 2, 4, "\"2.5\"", "\"admissions\""},
    {"empty column name", "region,date,cases,\nA,2020-01-01,1,2\n", 0, 0, NULL,
     NULL, NULL, TWOFOLD_EPARSE, 1, 4, "empty column name", NULL},
    {"span of all regions over the limit", H "A,0001-01-01,1\nA,9999-12-31,1\n",
     0, 0, NULL, NULL, NULL, TWOFOLD_ETOOLARGE, 3, 2, "\"9999-12-31\"",
     "\"A\""},
    {"quoted date with a doubled quote", H "A,\"2020-01-01\"\"\",1\n", 0, 0,
     NULL, NULL, NULL, TWOFOLD_EDATE, 2, 2, "\"2020-01-01\\\"\"", NULL},
    {"region and date options name the same column", H "A,2020-01-01,1\n", 0,
     0, "date", NULL, NULL, TWOFOLD_EINVAL, 1, 0, "same", NULL},
    {"count option names the region column", H "A,2020-01-01,1\n", 0, 0, NULL,
     NULL, "region", TWOFOLD_EINVAL, 1, 1, "count column", NULL},
    {"selected column names, bad count", "area,day,cases\nA,2020-01-01,x1\n", 0,
     0, "area", "day", NULL, TWOFOLD_ECOUNT, 2, 3, "\"x1\"", NULL},
};
#define NBAD ((int)(sizeof bad / sizeof bad[0]))

START_TEST(malformed_input) {
  const struct bad *b = &bad[_i];
  twofold_read_options *o;
  ck_assert_int_eq(twofold_read_options_new(&o), 0);
  ck_assert_int_eq(twofold_read_options_set_layout(o, b->layout), 0);
  if (b->region)
    ck_assert_int_eq(twofold_read_options_set_region_column(o, b->region), 0);
  if (b->date)
    ck_assert_int_eq(twofold_read_options_set_date_column(o, b->date), 0);
  if (b->count)
    ck_assert_int_eq(twofold_read_options_set_count_column(o, b->count), 0);
  twofold_set *set = (twofold_set *)&set; /* must be reset to NULL */
  twofold_error err;
  size_t len = b->len ? b->len : strlen(b->csv);
  int rc = twofold_read_memory(b->csv, len, NAME, o, &set, &err);
  twofold_read_options_free(o);
  ck_assert_msg(rc == b->code, "%s: code %s, expected %s (%s)", b->what,
                twofold_err_name(rc), twofold_err_name(b->code), err.text);
  ck_assert_ptr_null(set);
  ck_assert_int_eq(err.code, b->code);
  ck_assert_msg(err.line == b->line, "%s: line %ld, expected %ld (%s)",
                b->what, err.line, b->line, err.text);
  ck_assert_msg(err.column == b->column, "%s: column %ld, expected %ld (%s)",
                b->what, err.column, b->column, err.text);
  ck_assert_str_eq(err.file, NAME);
  char prefix[64];
  if (b->column > 0)
    snprintf(prefix, sizeof prefix, "%s:%ld:%ld: ", NAME, b->line, b->column);
  else
    snprintf(prefix, sizeof prefix, "%s:%ld: ", NAME, b->line);
  ck_assert_msg(strncmp(err.text, prefix, strlen(prefix)) == 0,
                "%s: text %s does not start with %s", b->what, err.text,
                prefix);
  ck_assert_msg(strstr(err.text, b->needle) != NULL,
                "%s: text %s lacks %s", b->what, err.text, b->needle);
  if (b->needle2)
    ck_assert_msg(strstr(err.text, b->needle2) != NULL,
                  "%s: text %s lacks %s", b->what, err.text, b->needle2);
}
END_TEST

/* A long value is cut in the message, which stays a valid C string. */
START_TEST(long_value_truncated) {
  size_t n = 5000;
  char *csv = malloc(n + 64);
  ck_assert_ptr_nonnull(csv);
  strcpy(csv, H "A,2020-01-01,");
  size_t k = strlen(csv);
  memset(csv + k, '7', n);
  strcpy(csv + k + n, "x\n");
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), TWOFOLD_ECOUNT);
  ck_assert_int_eq(err.line, 2);
  ck_assert_int_eq(err.column, 3);
  ck_assert_ptr_nonnull(strstr(err.text, "\"7777777"));
  ck_assert_ptr_nonnull(strstr(err.text, "...\""));
  ck_assert_uint_lt(strlen(err.text), TWOFOLD_ERROR_TEXT_SIZE);
  free(csv);
}
END_TEST

/* A record longer than TWOFOLD_READ_RECORD_MAX bytes. */
START_TEST(record_too_long) {
  size_t n = (size_t)TWOFOLD_READ_RECORD_MAX + 16;
  size_t hl = strlen(H "A,2020-01-01,1\n");
  char *csv = malloc(hl + n + 32);
  ck_assert_ptr_nonnull(csv);
  memcpy(csv, H "A,2020-01-01,1\n", hl);
  memset(csv + hl, 'B', n);
  memcpy(csv + hl + n, ",2020-01-02,1\n", 15);
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(twofold_read_memory(csv, hl + n + 14, NAME, NULL, &set,
                                       &err),
                   TWOFOLD_ETOOLARGE);
  ck_assert_ptr_null(set);
  ck_assert_int_eq(err.line, 3);
  ck_assert_int_eq(err.column, 0);
  ck_assert_ptr_nonnull(strstr(err.text, NAME ":3: "));
  free(csv);
}
END_TEST

START_TEST(missing_file) {
  twofold_set *set = (twofold_set *)&set;
  twofold_error err;
  const char *path = "/nonexistent/twofold-read-test.csv";
  ck_assert_int_eq(twofold_read_file(path, NULL, &set, &err), TWOFOLD_EIO);
  ck_assert_ptr_null(set);
  ck_assert_int_eq(err.code, TWOFOLD_EIO);
  ck_assert_ptr_nonnull(strstr(err.text, path));
  ck_assert_str_eq(err.file, path);
}
END_TEST

START_TEST(bad_arguments) {
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(twofold_read_memory(NULL, 5, "x", NULL, &set, &err),
                   TWOFOLD_EINVAL);
  ck_assert_ptr_null(set);
  ck_assert_int_eq(twofold_read_memory("a", 1, "x", NULL, NULL, &err),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_read_fd(-1, "x", NULL, &set, &err),
                   TWOFOLD_EINVAL);
  ck_assert_ptr_null(set);
  ck_assert_int_eq(twofold_read_file(NULL, NULL, &set, &err), TWOFOLD_EINVAL);
  ck_assert_ptr_null(set);
  /* an empty memory buffer is an empty file */
  ck_assert_int_eq(twofold_read_memory(NULL, 0, NULL, NULL, &set, &err),
                   TWOFOLD_EEMPTY);
  ck_assert_str_eq(err.file, "<memory>");
}
END_TEST

/* ---------------------------------------------------------------------- */
/* Good inputs                                                            */
/* ---------------------------------------------------------------------- */

START_TEST(options_api) {
  ck_assert_str_eq(twofold_layout_to_string(TWOFOLD_LAYOUT_AUTO), "auto");
  ck_assert_str_eq(twofold_layout_to_string(TWOFOLD_LAYOUT_LONG), "long");
  ck_assert_str_eq(twofold_layout_to_string(TWOFOLD_LAYOUT_WIDE), "wide");
  ck_assert_ptr_null(twofold_layout_to_string(3));
  ck_assert_ptr_null(twofold_layout_to_string(-1));
  ck_assert_int_eq(twofold_layout_from_string("auto"), TWOFOLD_LAYOUT_AUTO);
  ck_assert_int_eq(twofold_layout_from_string("long"), TWOFOLD_LAYOUT_LONG);
  ck_assert_int_eq(twofold_layout_from_string("wide"), TWOFOLD_LAYOUT_WIDE);
  ck_assert_int_eq(twofold_layout_from_string("Wide"), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_layout_from_string(NULL), TWOFOLD_EINVAL);
  twofold_read_options *o;
  ck_assert_int_eq(twofold_read_options_new(&o), 0);
  ck_assert_int_eq(twofold_read_options_set_layout(o, 7), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_read_options_set_region_column(o, NULL),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_read_options_set_region_column(o, ""),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_read_options_set_date_column(o, NULL),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_read_options_set_count_column(o, "x"), 0);
  ck_assert_int_eq(twofold_read_options_set_count_column(o, NULL), 0);
  ck_assert_int_eq(twofold_read_options_set_layout(NULL, 0), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_read_options_new(NULL), TWOFOLD_EINVAL);
  twofold_read_options_free(o);
  twofold_read_options_free(NULL);
}
END_TEST

START_TEST(basic_long) {
  const char *csv = H "North,2020-03-01,4\nNorth,2020-03-02,7\n"
                      "South,2020-03-02,0\nNorth,2020-03-03,007\n";
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), 0);
  ck_assert_int_eq(err.code, 0);
  ck_assert_uint_eq(twofold_set_count(set), 2);
  const twofold_series *n = twofold_set_at(set, 0);
  ck_assert_str_eq(twofold_series_region(n), "North");
  ck_assert_int_eq(twofold_series_first_day(n), day_of("2020-03-01"));
  ck_assert_uint_eq(twofold_series_length(n), 3);
  ck_assert_uint_eq(twofold_series_columns(n), 1);
  ck_assert_str_eq(twofold_series_column_name(n, 0), "cases");
  const double *v = twofold_series_values(n, 0);
  ck_assert_double_eq(v[0], 4);
  ck_assert_double_eq(v[1], 7);
  ck_assert_double_eq(v[2], 7);
  const twofold_series *s = twofold_set_find(set, "South");
  ck_assert_ptr_eq(s, twofold_set_at(set, 1));
  ck_assert_uint_eq(twofold_series_length(s), 1);
  ck_assert_double_eq(twofold_series_values(s, 0)[0], 0); /* a real zero */
  twofold_set_free(set);
  /* opts and err may be NULL */
  ck_assert_int_eq(twofold_read_memory(csv, strlen(csv), NULL, NULL, &set,
                                       NULL),
                   0);
  twofold_set_free(set);
}
END_TEST

START_TEST(first_appearance_order) {
  const char *csv = H "Gamma,2020-01-02,1\nAlpha,2020-01-01,1\n"
                      "Gamma,2020-01-01,1\nBeta,2020-01-01,1\n"
                      "Alpha,2020-01-02,1\n";
  twofold_set *set;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, NULL), 0);
  ck_assert_uint_eq(twofold_set_count(set), 3);
  ck_assert_str_eq(twofold_series_region(twofold_set_at(set, 0)), "Gamma");
  ck_assert_str_eq(twofold_series_region(twofold_set_at(set, 1)), "Alpha");
  ck_assert_str_eq(twofold_series_region(twofold_set_at(set, 2)), "Beta");
  twofold_set_free(set);
}
END_TEST

/* RFC 4180 section 2, rules 5-7: quoted fields with commas, doubled quotes
 * and line breaks; any field may be quoted. */
START_TEST(quoting) {
  const char *csv =
      "\"region\",date,\"cases\"\n"
      "\"North, \"\"Upper\"\" Valley\",2020-01-01,5\n"
      "\"Line\nBreak\",\"2020-01-01\",\"7\"\n"
      "\"Line\nBreak\",2020-01-02,\"\"\n"
      "\"\"\"\",2020-01-01,1\n";
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), 0);
  ck_assert_uint_eq(twofold_set_count(set), 3);
  const twofold_series *a = twofold_set_at(set, 0);
  ck_assert_str_eq(twofold_series_region(a), "North, \"Upper\" Valley");
  ck_assert_double_eq(twofold_series_values(a, 0)[0], 5);
  const twofold_series *b = twofold_set_at(set, 1);
  ck_assert_str_eq(twofold_series_region(b), "Line\nBreak");
  ck_assert_uint_eq(twofold_series_length(b), 2);
  ck_assert_double_eq(twofold_series_values(b, 0)[0], 7);
  ck_assert(isnan(twofold_series_values(b, 0)[1])); /* "" = missing */
  ck_assert_str_eq(twofold_series_region(twofold_set_at(set, 2)), "\"");
  twofold_set_free(set);
}
END_TEST

START_TEST(crlf_bom_no_final_newline) {
  const char *csv = "\xef\xbb\xbfregion,date,cases\r\nA,2020-01-01,1\r\n"
                    "\"B\r\nC\",2020-01-01,2\r\nA,2020-01-02,3";
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), 0);
  ck_assert_uint_eq(twofold_set_count(set), 2);
  const twofold_series *a = twofold_set_find(set, "A");
  ck_assert_ptr_nonnull(a);
  ck_assert_uint_eq(twofold_series_length(a), 2);
  ck_assert_double_eq(twofold_series_values(a, 0)[1], 3);
  /* a line break inside quotes is data, kept as it is */
  ck_assert_ptr_nonnull(twofold_set_find(set, "B\r\nC"));
  twofold_set_free(set);
  /* lone CR at the very end ends the last record */
  ck_assert_int_eq(read_str(H "A,2020-01-01,1\r", 0, NULL, &set, &err), 0);
  twofold_set_free(set);
}
END_TEST

/* Rows in any order; dates never given are gaps, not zeros. */
START_TEST(unsorted_and_gaps) {
  const char *csv = H "A,2020-01-09,9\nB,2020-02-01,1\nA,2020-01-02,2\n"
                      "A,2020-01-06,6\nA,2020-01-01,1\nA,2020-01-07,\n"
                      "A,2020-01-05,5\n";
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), 0);
  const twofold_series *a = twofold_set_find(set, "A");
  ck_assert_int_eq(twofold_series_first_day(a), day_of("2020-01-01"));
  ck_assert_uint_eq(twofold_series_length(a), 9);
  const double *v = twofold_series_values(a, 0);
  const double want[9] = {1, 2, NAN, NAN, 5, 6, NAN, NAN, 9};
  for (int i = 0; i < 9; i++) {
    if (isnan(want[i]))
      ck_assert_msg(isnan(v[i]), "day %d should be missing", i);
    else
      ck_assert_double_eq(v[i], want[i]);
  }
  ck_assert_uint_eq(twofold_series_missing(a, 0), 4);
  ck_assert_uint_eq(twofold_series_gaps(a, 0), 2);
  size_t start, len;
  ck_assert_int_eq(twofold_series_gap(a, 0, 0, &start, &len), 0);
  ck_assert_uint_eq(start, 2);
  ck_assert_uint_eq(len, 2);
  ck_assert_int_eq(twofold_series_gap(a, 0, 1, &start, &len), 0);
  ck_assert_uint_eq(start, 6);
  ck_assert_uint_eq(len, 2);
  twofold_set_free(set);
}
END_TEST

/* Reverse order over a long stretch: the window grows at its front. */
START_TEST(reverse_order_long_span) {
  size_t n = 3000;
  char *csv = malloc(n * 32 + 32);
  ck_assert_ptr_nonnull(csv);
  size_t o = (size_t)sprintf(csv, H);
  int32_t d0 = day_of("2015-06-01");
  for (size_t i = n; i-- > 0;) {
    char d[11];
    twofold_date_format(d0 + (int32_t)i, d, sizeof d);
    o += (size_t)sprintf(csv + o, "R,%s,%zu\n", d, i);
  }
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, o, NULL, &set, &err), 0);
  const twofold_series *s = twofold_set_at(set, 0);
  ck_assert_int_eq(twofold_series_first_day(s), d0);
  ck_assert_uint_eq(twofold_series_length(s), n);
  for (size_t i = 0; i < n; i++)
    ck_assert_double_eq(twofold_series_values(s, 0)[i], (double)i);
  twofold_set_free(set);
  free(csv);
}
END_TEST

START_TEST(extra_columns) {
  const char *csv = "region,cases,date,admissions\n"
                    "A,10,2020-01-01,1\nA,12,2020-01-02,\nB,3,2020-01-01,0\n";
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), 0);
  const twofold_series *a = twofold_set_at(set, 0);
  ck_assert_uint_eq(twofold_series_columns(a), 2);
  ck_assert_str_eq(twofold_series_column_name(a, 0), "cases");
  ck_assert_str_eq(twofold_series_column_name(a, 1), "admissions");
  ck_assert_double_eq(twofold_series_values(a, 0)[1], 12);
  ck_assert_double_eq(twofold_series_values(a, 1)[0], 1);
  ck_assert(isnan(twofold_series_values(a, 1)[1]));
  twofold_set_free(set);
  /* a chosen count column comes first, the others keep header order */
  twofold_read_options *o;
  ck_assert_int_eq(twofold_read_options_new(&o), 0);
  ck_assert_int_eq(twofold_read_options_set_count_column(o, "admissions"), 0);
  ck_assert_int_eq(read_str(csv, 0, o, &set, &err), 0);
  a = twofold_set_at(set, 0);
  ck_assert_str_eq(twofold_series_column_name(a, 0), "admissions");
  ck_assert_str_eq(twofold_series_column_name(a, 1), "cases");
  ck_assert_double_eq(twofold_series_values(a, 0)[0], 1);
  ck_assert_double_eq(twofold_series_values(a, 1)[0], 10);
  twofold_set_free(set);
  twofold_read_options_free(o);
}
END_TEST

START_TEST(wide_layout) {
  const char *csv = "date,North,South\n2020-01-03,1,\n2020-01-01,3,4\n";
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), 0); /* auto: wide */
  ck_assert_uint_eq(twofold_set_count(set), 2);
  const twofold_series *n = twofold_set_at(set, 0), *s = twofold_set_at(set, 1);
  ck_assert_str_eq(twofold_series_region(n), "North");
  ck_assert_str_eq(twofold_series_region(s), "South");
  ck_assert_str_eq(twofold_series_column_name(n, 0), "count");
  ck_assert_int_eq(twofold_series_first_day(n), day_of("2020-01-01"));
  ck_assert_uint_eq(twofold_series_length(n), 3);
  ck_assert_double_eq(twofold_series_values(n, 0)[0], 3);
  ck_assert(isnan(twofold_series_values(n, 0)[1])); /* never given */
  ck_assert_double_eq(twofold_series_values(n, 0)[2], 1);
  ck_assert_double_eq(twofold_series_values(s, 0)[0], 4);
  ck_assert(isnan(twofold_series_values(s, 0)[2])); /* empty cell */
  ck_assert_uint_eq(twofold_series_gaps(s, 0), 1);
  twofold_set_free(set);
  /* explicit wide layout with a selected date column name; a column
   * called "region" is then just a region */
  twofold_read_options *o;
  ck_assert_int_eq(twofold_read_options_new(&o), 0);
  ck_assert_int_eq(twofold_read_options_set_layout(o, TWOFOLD_LAYOUT_WIDE),
                   0);
  ck_assert_int_eq(twofold_read_options_set_date_column(o, "day"), 0);
  ck_assert_int_eq(read_str("region,day\n5,2020-01-01\n", 0, o, &set, &err),
                   0);
  ck_assert_uint_eq(twofold_set_count(set), 1);
  ck_assert_str_eq(twofold_series_region(twofold_set_at(set, 0)), "region");
  ck_assert_double_eq(twofold_series_values(twofold_set_at(set, 0), 0)[0], 5);
  twofold_set_free(set);
  twofold_read_options_free(o);
}
END_TEST

START_TEST(selected_columns) {
  const char *csv = "day,area,cases\n2020-01-01,X,2\n2020-01-02,X,3\n";
  twofold_read_options *o;
  ck_assert_int_eq(twofold_read_options_new(&o), 0);
  ck_assert_int_eq(twofold_read_options_set_region_column(o, "area"), 0);
  ck_assert_int_eq(twofold_read_options_set_date_column(o, "day"), 0);
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, o, &set, &err), 0);
  ck_assert_uint_eq(twofold_set_count(set), 1);
  const twofold_series *x = twofold_set_find(set, "X");
  ck_assert_uint_eq(twofold_series_length(x), 2);
  ck_assert_double_eq(twofold_series_values(x, 0)[1], 3);
  twofold_set_free(set);
  twofold_read_options_free(o);
}
END_TEST

START_TEST(count_boundary) {
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(
      read_str(H "A,2020-01-01,9007199254740992\nA,2020-01-02,0\n", 0, NULL,
               &set, &err),
      0);
  ck_assert_double_eq(twofold_series_values(twofold_set_at(set, 0), 0)[0],
                      9007199254740992.0);
  twofold_set_free(set);
  ck_assert_int_eq(
      read_str(H "A,2020-01-01,9007199254740993\n", 0, NULL, &set, &err),
      TWOFOLD_ECOUNT);
  ck_assert_ptr_null(set);
}
END_TEST

/* A single region of 10^6 days (two rows) is accepted. */
START_TEST(million_day_region) {
  char csv[128], d[11];
  int32_t d0 = day_of("1900-01-01");
  twofold_date_format(d0 + 999999, d, sizeof d);
  snprintf(csv, sizeof csv, H "A,1900-01-01,1\nA,%s,2\n", d);
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(read_str(csv, 0, NULL, &set, &err), 0);
  const twofold_series *a = twofold_set_at(set, 0);
  ck_assert_uint_eq(twofold_series_length(a), 1000000);
  ck_assert_uint_eq(twofold_series_missing(a, 0), 999998);
  ck_assert_double_eq(twofold_series_values(a, 0)[999999], 2);
  twofold_set_free(set);
}
END_TEST

/* ---------------------------------------------------------------------- */
/* gzip, files, pipes                                                     */
/* ---------------------------------------------------------------------- */

static const char *small_csv = H "A,2020-01-01,1\nA,2020-01-02,2\n"
                                 "B,2020-01-01,3\nB,2020-01-03,4\n";

static void check_small(const twofold_set *set) {
  ck_assert_uint_eq(twofold_set_count(set), 2);
  const twofold_series *a = twofold_set_find(set, "A");
  const twofold_series *b = twofold_set_find(set, "B");
  ck_assert_ptr_nonnull(a);
  ck_assert_ptr_nonnull(b);
  ck_assert_double_eq(twofold_series_values(a, 0)[1], 2);
  ck_assert_uint_eq(twofold_series_length(b), 3);
  ck_assert(isnan(twofold_series_values(b, 0)[1]));
  ck_assert_double_eq(twofold_series_values(b, 0)[2], 4);
}

START_TEST(gzip_memory) {
  size_t zn;
  unsigned char *z = gzip_bytes(small_csv, strlen(small_csv), &zn);
  ck_assert_uint_eq(z[0], 0x1f);
  ck_assert_uint_eq(z[1], 0x8b);
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(twofold_read_memory(z, zn, NAME, NULL, &set, &err), 0);
  check_small(set);
  twofold_set_free(set);
  free(z);
}
END_TEST

/* RFC 1952 2.2: a gzip file is a series of members; split mid-record. */
START_TEST(gzip_members) {
  size_t n = strlen(small_csv), cut = 25, z1n, z2n;
  ck_assert_int_eq(small_csv[cut] == '\n', 0); /* inside a record */
  unsigned char *z1 = gzip_bytes(small_csv, cut, &z1n);
  unsigned char *z2 = gzip_bytes(small_csv + cut, n - cut, &z2n);
  unsigned char *z = malloc(z1n + z2n);
  ck_assert_ptr_nonnull(z);
  memcpy(z, z1, z1n);
  memcpy(z + z1n, z2, z2n);
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(twofold_read_memory(z, z1n + z2n, NAME, NULL, &set, &err),
                   0);
  check_small(set);
  twofold_set_free(set);
  free(z1);
  free(z2);
  free(z);
}
END_TEST

START_TEST(gzip_truncated) {
  size_t zn;
  unsigned char *z = gzip_bytes(small_csv, strlen(small_csv), &zn);
  twofold_set *set = (twofold_set *)&set;
  twofold_error err;
  /* without the last 4 trailer bytes (ISIZE): all 5 lines are there, the
   * stream ends inside the member, at line 6 */
  ck_assert_int_eq(twofold_read_memory(z, zn - 4, NAME, NULL, &set, &err),
                   TWOFOLD_EGZIP);
  ck_assert_ptr_null(set);
  ck_assert_int_eq(err.line, 6);
  ck_assert_int_eq(err.column, 0);
  ck_assert_ptr_nonnull(strstr(err.text, NAME ":6: "));
  ck_assert_ptr_nonnull(strstr(err.text, "truncated"));
  /* cut to the header only: the magic bytes and nothing else */
  ck_assert_int_eq(twofold_read_memory(z, 2, NAME, NULL, &set, &err),
                   TWOFOLD_EGZIP);
  ck_assert_int_eq(err.line, 1);
  /* half the stream */
  ck_assert_int_eq(twofold_read_memory(z, zn / 2, NAME, NULL, &set, &err),
                   TWOFOLD_EGZIP);
  ck_assert_ptr_null(set);
  free(z);
}
END_TEST

START_TEST(gzip_corrupt) {
  /* enough text that the deflate data is long */
  char *csv = malloc(200000);
  ck_assert_ptr_nonnull(csv);
  size_t o = (size_t)sprintf(csv, H);
  for (int i = 0; i < 4000; i++)
    o += (size_t)sprintf(csv + o, "R%d,2020-01-01,%d\n", i, i * 7);
  size_t zn;
  unsigned char *z = gzip_bytes(csv, o, &zn);
  twofold_set *set = (twofold_set *)&set;
  twofold_error err;
  /* damage the middle: either inflate finds invalid data or the CRC-32
   * in the trailer no longer matches */
  for (size_t i = zn / 2; i < zn / 2 + 16; i++)
    z[i] ^= 0x5a;
  ck_assert_int_eq(twofold_read_memory(z, zn, NAME, NULL, &set, &err),
                   TWOFOLD_EGZIP);
  ck_assert_ptr_null(set);
  ck_assert_int_ge(err.line, 1);
  ck_assert_int_eq(err.column, 0);
  ck_assert_ptr_nonnull(strstr(err.text, NAME ":"));
  ck_assert_ptr_nonnull(strstr(err.text, "corrupt gzip"));
  free(z);
  /* garbage after a complete member is not another member */
  z = gzip_bytes(small_csv, strlen(small_csv), &zn);
  unsigned char *g = malloc(zn + 8);
  ck_assert_ptr_nonnull(g);
  memcpy(g, z, zn);
  memcpy(g + zn, "garbage!", 8);
  ck_assert_int_eq(twofold_read_memory(g, zn + 8, NAME, NULL, &set, &err),
                   TWOFOLD_EGZIP);
  ck_assert_int_eq(err.line, 6);
  free(g);
  free(z);
  free(csv);
}
END_TEST

static char *temp_file(const void *data, size_t n);

/* Level 0 stores the text as it is (RFC 1951 3.2.4, stored blocks), so a
 * changed byte there passes inflate and only the CRC-32 in the trailer
 * (RFC 1952 2.3.1) shows it: the bad count it makes must not be reported
 * as a bad count but as a damaged stream. */
START_TEST(gzip_damage_seen_by_crc) {
  size_t zn;
  unsigned char *z = gzip_level(small_csv, strlen(small_csv), &zn, 0);
  const char *row = "B,2020-01-01,3";
  unsigned char *at = NULL;
  for (size_t i = 0; i + strlen(row) <= zn && at == NULL; i++)
    if (memcmp(z + i, row, strlen(row)) == 0)
      at = z + i;
  ck_assert_ptr_nonnull(at);
  at[strlen(row) - 1] = 'x';
  twofold_set *set = (twofold_set *)&set;
  twofold_error err;
  ck_assert_int_eq(twofold_read_memory(z, zn, NAME, NULL, &set, &err),
                   TWOFOLD_EGZIP);
  ck_assert_ptr_null(set);
  ck_assert_int_eq(err.line, 4); /* where the damage showed */
  ck_assert_int_eq(err.column, 0);
  ck_assert_ptr_nonnull(strstr(err.text, NAME ":4: "));
  ck_assert_ptr_nonnull(strstr(err.text, "corrupt gzip"));
  /* the same through a regular file (read ahead in a second thread) */
  char *p = temp_file(z, zn);
  ck_assert_int_eq(twofold_read_file(p, NULL, &set, &err), TWOFOLD_EGZIP);
  ck_assert_int_eq(err.line, 4);
  unlink(p);
  free(p);
  free(z);
}
END_TEST

static char *temp_file(const void *data, size_t n) {
  char *path = malloc(64);
  ck_assert_ptr_nonnull(path);
  snprintf(path, 64, "/tmp/twofold-read-XXXXXX");
  int fd = mkstemp(path);
  ck_assert_int_ge(fd, 0);
  ck_assert_int_eq(write(fd, data, n), (ssize_t)n);
  close(fd);
  return path;
}

START_TEST(file_plain_and_gzip) {
  twofold_set *set;
  twofold_error err;
  char *p = temp_file(small_csv, strlen(small_csv));
  ck_assert_int_eq(twofold_read_file(p, NULL, &set, &err), 0);
  check_small(set);
  twofold_set_free(set);
  unlink(p);
  free(p);
  size_t zn;
  unsigned char *z = gzip_bytes(small_csv, strlen(small_csv), &zn);
  p = temp_file(z, zn);
  ck_assert_int_eq(twofold_read_file(p, NULL, &set, &err), 0);
  check_small(set);
  twofold_set_free(set);
  /* truncated file: the error names the path */
  ck_assert_int_eq(truncate(p, (off_t)(zn - 3)), 0);
  ck_assert_int_eq(twofold_read_file(p, NULL, &set, &err), TWOFOLD_EGZIP);
  ck_assert_ptr_nonnull(strstr(err.text, p));
  ck_assert_str_eq(err.file, p);
  unlink(p);
  free(p);
  free(z);
}
END_TEST

/* stdin: a pipe, read through its descriptor. */
START_TEST(pipe_fd) {
  int fds[2];
  ck_assert_int_eq(pipe(fds), 0);
  size_t n = strlen(small_csv);
  ck_assert_int_eq(write(fds[1], small_csv, n), (ssize_t)n);
  close(fds[1]);
  twofold_set *set;
  twofold_error err;
  ck_assert_int_eq(twofold_read_fd(fds[0], "<stdin>", NULL, &set, &err), 0);
  close(fds[0]);
  check_small(set);
  twofold_set_free(set);
  /* gzip through a pipe, and an error labelled with the given name */
  size_t zn;
  const char *badcsv = H "A,2020-01-01,x\n";
  unsigned char *z = gzip_bytes(badcsv, strlen(badcsv), &zn);
  ck_assert_int_eq(pipe(fds), 0);
  ck_assert_int_eq(write(fds[1], z, zn), (ssize_t)zn);
  close(fds[1]);
  ck_assert_int_eq(twofold_read_fd(fds[0], "<stdin>", NULL, &set, &err),
                   TWOFOLD_ECOUNT);
  close(fds[0]);
  ck_assert_ptr_null(set);
  ck_assert_ptr_nonnull(strstr(err.text, "<stdin>:2:3: "));
  ck_assert_ptr_nonnull(strstr(err.text, "\"x\""));
  free(z);
}
END_TEST

/* Many rows (several buffer refills), quoted names with doubled quotes
 * and line breaks placed across refill boundaries, read from a plain file
 * and as gzip; then an error on the last line to check the line count. */
START_TEST(large_input) {
  const int regions = 300, days = 400;
  size_t cap = (size_t)regions * (size_t)days * 48 + 64;
  char *csv = malloc(cap);
  ck_assert_ptr_nonnull(csv);
  size_t o = (size_t)sprintf(csv, "region,date,cases,admissions\n");
  long lines = 1;
  int32_t d0 = day_of("2021-01-01");
  for (int k = 0; k < days; k++) {
    char d[11];
    twofold_date_format(d0 + k, d, sizeof d);
    for (int r = 0; r < regions; r++) {
      if (r % 3 == 0) {
        o += (size_t)sprintf(csv + o, "\"R \"\"%d\"\"\nx\",%s,%d,%d\n", r, d,
                             r + k, k % 5);
        lines += 2;
      } else {
        o += (size_t)sprintf(csv + o, "R%d,%s,%d,\n", r, d, r * k);
        lines += 1;
      }
    }
  }
  ck_assert_uint_gt(o, 1u << 20);
  twofold_set *set;
  twofold_error err;
  char *p = temp_file(csv, o);
  ck_assert_int_eq(twofold_read_file(p, NULL, &set, &err), 0);
  ck_assert_uint_eq(twofold_set_count(set), (size_t)regions);
  for (int r = 0; r < regions; r += 7) {
    char name[32];
    if (r % 3 == 0)
      snprintf(name, sizeof name, "R \"%d\"\nx", r);
    else
      snprintf(name, sizeof name, "R%d", r);
    const twofold_series *s = twofold_set_find(set, name);
    ck_assert_msg(s != NULL, "region %d", r);
    ck_assert_ptr_eq(s, twofold_set_at(set, (size_t)r));
    ck_assert_uint_eq(twofold_series_length(s), (size_t)days);
    for (int k = 0; k < days; k += 13) {
      ck_assert_double_eq(twofold_series_values(s, 0)[k],
                          r % 3 == 0 ? r + k : r * k);
      if (r % 3 == 0)
        ck_assert_double_eq(twofold_series_values(s, 1)[k], k % 5);
      else
        ck_assert(isnan(twofold_series_values(s, 1)[k]));
    }
  }
  twofold_set_free(set);
  size_t zn;
  unsigned char *z = gzip_bytes(csv, o, &zn);
  ck_assert_int_eq(twofold_read_memory(z, zn, NAME, NULL, &set, &err), 0);
  ck_assert_uint_eq(twofold_set_count(set), (size_t)regions);
  twofold_set_free(set);
  free(z);
  /* append a bad row: its line is lines + 1 */
  o += (size_t)sprintf(csv + o, "R1,2030-01-01,1.5,\n");
  ck_assert_int_eq(read_str(csv, o, NULL, &set, &err), TWOFOLD_ECOUNT);
  ck_assert_int_eq(err.line, lines + 1);
  ck_assert_int_eq(err.column, 3);
  unlink(p);
  free(p);
  free(csv);
}
END_TEST

/* twofold_read_options_set_region_fn: the regions handed over while
 * reading, with their rows so far (the values are the inputs below). */
typedef struct seen {
  int n;
  size_t index[8];
  char region[8][8];
  size_t length[8];
  double last[8], admissions_last[8];
} seen;

static void on_region(void *arg, size_t index, const twofold_series *s) {
  seen *k = arg;
  ck_assert_int_lt(k->n, 8);
  k->index[k->n] = index;
  snprintf(k->region[k->n], sizeof k->region[0], "%s",
           twofold_series_region(s));
  size_t len = twofold_series_length(s);
  k->length[k->n] = len;
  int a = twofold_series_column_index(s, "admissions");
  ck_assert_int_eq(a, 1);
  k->last[k->n] = twofold_series_values(s, 0)[len - 1];
  k->admissions_last[k->n] = twofold_series_values(s, 1)[len - 1];
  k->n++;
}

START_TEST(region_fn) {
  twofold_read_options *o;
  ck_assert_int_eq(twofold_read_options_new(&o), 0);
  ck_assert_int_eq(twofold_read_options_set_region_fn(NULL, on_region, NULL),
                   TWOFOLD_EINVAL);
  seen k;
  memset(&k, 0, sizeof k);
  ck_assert_int_eq(twofold_read_options_set_region_fn(o, on_region, &k), 0);
  twofold_set *set;
  twofold_error err;
  /* Sorted by region: A and B are handed over complete, C (the last) is
   * not handed over. */
  const char *sorted = "region,date,cases,admissions\n"
                       "A,2020-01-01,1,0\nA,2020-01-02,2,1\nA,2020-01-03,3,2\n"
                       "B,2020-01-02,7,3\nB,2020-01-03,8,4\n"
                       "C,2020-01-01,5,5\n";
  ck_assert_int_eq(read_str(sorted, 0, o, &set, &err), 0);
  ck_assert_int_eq(k.n, 2);
  ck_assert_uint_eq(k.index[0], 0);
  ck_assert_str_eq(k.region[0], "A");
  ck_assert_uint_eq(k.length[0], 3);
  ck_assert_double_eq(k.last[0], 3);
  ck_assert_double_eq(k.admissions_last[0], 2);
  ck_assert_uint_eq(k.index[1], 1);
  ck_assert_str_eq(k.region[1], "B");
  ck_assert_uint_eq(k.length[1], 2);
  ck_assert_double_eq(k.last[1], 8);
  ck_assert_double_eq(k.admissions_last[1], 4);
  ck_assert_str_eq(twofold_series_region(twofold_set_at(set, 1)), "B");
  twofold_set_free(set);
  /* A comes back after B: A was handed over with one day; the row that
   * leaves B gives A more rows, so the calls stop there (none for B, C),
   * and the set has all of A. */
  memset(&k, 0, sizeof k);
  const char *mixed = "region,date,cases,admissions\n"
                      "A,2020-01-01,1,0\nB,2020-01-01,4,1\n"
                      "A,2020-01-02,2,1\nC,2020-01-01,6,2\n"
                      "D,2020-01-01,9,3\n";
  ck_assert_int_eq(read_str(mixed, 0, o, &set, &err), 0);
  ck_assert_int_eq(k.n, 1);
  ck_assert_str_eq(k.region[0], "A");
  ck_assert_uint_eq(k.length[0], 1);
  ck_assert_uint_eq(twofold_series_length(twofold_set_find(set, "A")), 2);
  twofold_set_free(set);
  /* Wide files: no calls. */
  memset(&k, 0, sizeof k);
  const char *wide = "date,A,B\n2020-01-01,1,2\n2020-01-02,3,4\n";
  ck_assert_int_eq(read_str(wide, 0, o, &set, &err), 0);
  ck_assert_int_eq(k.n, 0);
  twofold_set_free(set);
  /* NULL turns the calls off. */
  ck_assert_int_eq(twofold_read_options_set_region_fn(o, NULL, NULL), 0);
  ck_assert_int_eq(read_str(sorted, 0, o, &set, &err), 0);
  twofold_set_free(set);
  twofold_read_options_free(o);
}
END_TEST

static Suite *read_suite(void) {
  Suite *s = suite_create("read");
  TCase *tc = tcase_create("malformed");
  tcase_add_loop_test(tc, malformed_input, 0, NBAD);
  tcase_add_test(tc, long_value_truncated);
  tcase_add_test(tc, missing_file);
  tcase_add_test(tc, bad_arguments);
  suite_add_tcase(s, tc);
  tc = tcase_create("good");
  tcase_add_test(tc, options_api);
  tcase_add_test(tc, basic_long);
  tcase_add_test(tc, first_appearance_order);
  tcase_add_test(tc, quoting);
  tcase_add_test(tc, crlf_bom_no_final_newline);
  tcase_add_test(tc, unsorted_and_gaps);
  tcase_add_test(tc, reverse_order_long_span);
  tcase_add_test(tc, extra_columns);
  tcase_add_test(tc, wide_layout);
  tcase_add_test(tc, selected_columns);
  tcase_add_test(tc, count_boundary);
  tcase_add_test(tc, million_day_region);
  tcase_add_test(tc, region_fn);
  suite_add_tcase(s, tc);
  tc = tcase_create("streams");
  tcase_set_timeout(tc, 120); /* generous for runs under valgrind */
  tcase_add_test(tc, gzip_memory);
  tcase_add_test(tc, gzip_members);
  tcase_add_test(tc, gzip_truncated);
  tcase_add_test(tc, gzip_corrupt);
  tcase_add_test(tc, gzip_damage_seen_by_crc);
  tcase_add_test(tc, file_plain_and_gzip);
  tcase_add_test(tc, pipe_fd);
  tcase_add_test(tc, large_input);
  tcase_add_test(tc, record_too_long);
  suite_add_tcase(s, tc);
  return s;
}

int main(void) {
  SRunner *sr = srunner_create(read_suite());
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
