/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Fuzz harness for the CSV reader: twofold_read_memory (and, for some
 * inputs, twofold_read_fd) on arbitrary bytes, plain or gzip-compressed.
 *
 * The first byte selects how the rest is read:
 *   bits 0-1  layout: 0 auto, 1 long, 2 wide, 3 an invalid value (the
 *             setter must refuse it; the read then uses auto)
 *   bit 2     gzip-compress the rest with zlib before reading
 *   bit 3     with bit 2: cut the compressed stream short (must fail)
 *   bit 4     region and date columns named "r" and "d"
 *   bit 5     count column named "c"
 *   bit 6     read through a file descriptor (a temporary file)
 *   bit 7     read twice and compare the sets (same input, same output)
 * Beyond "no crash, no leak, no undefined behaviour" it checks the
 * header's promises: on failure *out is NULL and err says what and where;
 * on success every value is NaN or a whole count in [0, 2^53] and the
 * series' summaries agree with their values. */
#include "fuzz.h"
#include "twofold.h"

#include <math.h>
#include <string.h>
#include <unistd.h>
#include <zlib.h>

/* gzip-compress in[0..n-1] into a new buffer (NULL on failure). */
static uint8_t *gzip_bytes(const uint8_t *in, size_t n, size_t *outn) {
  z_stream zs;
  memset(&zs, 0, sizeof zs);
  if (deflateInit2(&zs, 6, Z_DEFLATED, 15 + 16, 8, Z_DEFAULT_STRATEGY) !=
      Z_OK)
    return NULL;
  uLong bound = deflateBound(&zs, (uLong)n) + 32;
  uint8_t *out = malloc(bound);
  if (!out) {
    deflateEnd(&zs);
    return NULL;
  }
  zs.next_in = (Bytef *)(uintptr_t)in;
  zs.avail_in = (uInt)n;
  zs.next_out = out;
  zs.avail_out = (uInt)bound;
  int rc = deflate(&zs, Z_FINISH);
  *outn = (size_t)zs.total_out;
  deflateEnd(&zs);
  if (rc != Z_STREAM_END) {
    free(out);
    return NULL;
  }
  return out;
}

static int is_count(double v) {
  return isnan(v) || (v >= 0 && v <= 9007199254740992.0 && v == floor(v));
}

/* Check a set the reader returned. */
static void check_set(const twofold_set *set) {
  size_t n = twofold_set_count(set);
  FUZZ_CHECK(twofold_set_at(set, n) == NULL);
  for (size_t i = 0; i < n; i++) {
    const twofold_series *s = twofold_set_at(set, i);
    FUZZ_CHECK(s != NULL);
    const char *region = twofold_series_region(s);
    FUZZ_CHECK(region != NULL);
    FUZZ_CHECK(twofold_set_find(set, region) == s);
    int32_t first = twofold_series_first_day(s);
    size_t len = twofold_series_length(s);
    FUZZ_CHECK(first >= TWOFOLD_DAY_MIN && first <= TWOFOLD_DAY_MAX);
    FUZZ_CHECK(len == 0 ||
               (int64_t)first + (int64_t)len - 1 <= TWOFOLD_DAY_MAX);
    size_t ncol = twofold_series_columns(s);
    FUZZ_CHECK(ncol >= 1);
    FUZZ_CHECK(twofold_series_values(s, ncol) == NULL);
    FUZZ_CHECK(twofold_series_column_name(s, ncol) == NULL);
    for (size_t c = 0; c < ncol; c++) {
      const char *name = twofold_series_column_name(s, c);
      FUZZ_CHECK(name != NULL);
      int idx = twofold_series_column_index(s, name);
      FUZZ_CHECK(idx >= 0 && (size_t)idx <= c);
      const double *v = twofold_series_values(s, c);
      FUZZ_CHECK(len == 0 || v != NULL);
      size_t missing = 0;
      for (size_t d = 0; d < len; d++) {
        FUZZ_CHECK(is_count(v[d]));
        missing += isnan(v[d]) ? 1 : 0;
      }
      FUZZ_CHECK(twofold_series_missing(s, c) == missing);
      double total = twofold_series_total(s, c);
      FUZZ_CHECK(!isnan(total) && total >= 0);
      size_t gaps = twofold_series_gaps(s, c), inside = 0;
      for (size_t k = 0; k < gaps; k++) {
        size_t start = 0, glen = 0;
        FUZZ_CHECK(twofold_series_gap(s, c, k, &start, &glen) == 0);
        FUZZ_CHECK(glen > 0 && start + glen <= len);
        FUZZ_CHECK(isnan(v[start]) && isnan(v[start + glen - 1]));
        inside += glen;
      }
      FUZZ_CHECK(inside == missing);
      size_t start = 0, glen = 0;
      FUZZ_CHECK(twofold_series_gap(s, c, gaps, &start, &glen) ==
                 TWOFOLD_ENOTFOUND);
    }
  }
  twofold_series *total = NULL;
  int rc = twofold_set_total(set, "all", &total);
  FUZZ_CHECK(n == 0 ? rc == TWOFOLD_EEMPTY : (rc == 0 || rc < 0));
  if (rc == 0) {
    FUZZ_CHECK(total != NULL);
    for (size_t c = 0; c < twofold_series_columns(total); c++) {
      const double *v = twofold_series_values(total, c);
      for (size_t d = 0; d < twofold_series_length(total); d++)
        FUZZ_CHECK(isnan(v[d]) || v[d] >= 0);
    }
  } else {
    FUZZ_CHECK(total == NULL);
  }
  twofold_series_free(total);
}

/* 1 if the two sets hold the same regions, days, columns and values (bit
 * for bit). */
static int same_sets(const twofold_set *a, const twofold_set *b) {
  if (twofold_set_count(a) != twofold_set_count(b))
    return 0;
  for (size_t i = 0; i < twofold_set_count(a); i++) {
    const twofold_series *s = twofold_set_at(a, i), *t = twofold_set_at(b, i);
    if (strcmp(twofold_series_region(s), twofold_series_region(t)) != 0 ||
        twofold_series_first_day(s) != twofold_series_first_day(t) ||
        twofold_series_length(s) != twofold_series_length(t) ||
        twofold_series_columns(s) != twofold_series_columns(t))
      return 0;
    for (size_t c = 0; c < twofold_series_columns(s); c++) {
      if (strcmp(twofold_series_column_name(s, c),
                 twofold_series_column_name(t, c)) != 0)
        return 0;
      size_t len = twofold_series_length(s);
      if (len && memcmp(twofold_series_values(s, c),
                        twofold_series_values(t, c), len * sizeof(double)))
        return 0;
    }
  }
  return 1;
}

static void check_failure(int rc, const twofold_set *set,
                          const twofold_error *err, const char *name) {
  FUZZ_CHECK(rc < 0 && rc > TWOFOLD_E_LAST_);
  FUZZ_CHECK(set == NULL);
  FUZZ_CHECK(err->code == rc);
  FUZZ_CHECK(memchr(err->text, '\0', sizeof err->text) != NULL);
  FUZZ_CHECK(memchr(err->file, '\0', sizeof err->file) != NULL);
  FUZZ_CHECK(err->text[0] != '\0');
  if (rc != TWOFOLD_ENOMEM) {
    FUZZ_CHECK(strcmp(err->file, name) == 0);
    FUZZ_CHECK(err->line >= 0 && err->column >= 0);
  }
}

/* Read through a temporary file's descriptor. */
static int read_via_fd(const uint8_t *data, size_t size, const char *name,
                       const twofold_read_options *o, twofold_set **out,
                       twofold_error *err) {
  FILE *f = tmpfile();
  if (!f)
    return twofold_read_memory(data, size, name, o, out, err);
  if (size && fwrite(data, 1, size, f) != size) {
    fclose(f);
    return twofold_read_memory(data, size, name, o, out, err);
  }
  fflush(f);
  int fd = fileno(f);
  if (lseek(fd, 0, SEEK_SET) != 0) {
    fclose(f);
    return twofold_read_memory(data, size, name, o, out, err);
  }
  int rc = twofold_read_fd(fd, name, o, out, err);
  fclose(f);
  return rc;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  if (size == 0)
    return 0;
  uint8_t sel = data[0];
  data++;
  size--;

  twofold_read_options *o = NULL;
  if (twofold_read_options_new(&o) != 0)
    return 0;
  int layout = sel & 3;
  if (layout == 3)
    FUZZ_CHECK(twofold_read_options_set_layout(o, 3) == TWOFOLD_EINVAL);
  else
    FUZZ_CHECK(twofold_read_options_set_layout(o, layout) == 0);
  if (sel & 0x10) {
    FUZZ_CHECK(twofold_read_options_set_region_column(o, "r") == 0);
    FUZZ_CHECK(twofold_read_options_set_date_column(o, "d") == 0);
  }
  if (sel & 0x20)
    FUZZ_CHECK(twofold_read_options_set_count_column(o, "c") == 0);

  const uint8_t *in = data;
  size_t inn = size;
  uint8_t *gz = NULL;
  int truncated = 0;
  if (sel & 0x04) {
    gz = gzip_bytes(data, size, &inn);
    if (!gz) {
      twofold_read_options_free(o);
      return 0;
    }
    in = gz;
    if ((sel & 0x08) && inn > 0) {
      /* Cut 1..8 bytes off the end: the trailer or more goes missing. */
      size_t cut = 1 + (size % 8);
      inn = cut < inn ? inn - cut : 0;
      truncated = inn > 0;
    }
  }

  const char *name = "fuzz.csv";
  twofold_set *set = NULL;
  twofold_error err;
  memset(&err, 0x5a, sizeof err); /* the reader must fill what it reports */
  int rc = (sel & 0x40) ? read_via_fd(in, inn, name, o, &set, &err)
                        : twofold_read_memory(in, inn, name, o, &set, &err);
  if (rc == 0) {
    FUZZ_CHECK(set != NULL);
    FUZZ_CHECK(!truncated);
    check_set(set);
  } else {
    check_failure(rc, set, &err, name);
  }

  if (sel & 0x80) {
    twofold_set *again = NULL;
    twofold_error err2;
    int rc2 = twofold_read_memory(in, inn, name, o, &again, &err2);
    FUZZ_CHECK(rc2 == rc);
    if (rc == 0) {
      FUZZ_CHECK(same_sets(set, again));
    } else {
      FUZZ_CHECK(err2.line == err.line && err2.column == err.column);
      FUZZ_CHECK(strcmp(err2.text, err.text) == 0);
    }
    twofold_set_free(again);
    /* A NULL error report and NULL options are allowed. */
    twofold_set *third = NULL;
    int rc3 = twofold_read_memory(in, inn, name, NULL, &third, NULL);
    FUZZ_CHECK(rc3 <= 0 && (rc3 == 0) == (third != NULL));
    twofold_set_free(third);
  }

  twofold_set_free(set);
  free(gz);
  twofold_read_options_free(o);
  return 0;
}
