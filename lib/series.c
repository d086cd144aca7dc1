/* SPDX-License-Identifier: GPL-3.0-or-later */
/* One region's daily counts: one or more named columns on shared dates. */
#include "internal.h"
#include "series.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static int name_ok(const char *s) { return s != NULL; }

int twofold_series_new(const char *region, int32_t first_day, size_t length,
                       const char *column0, twofold_series **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  *out = NULL;
  if (!name_ok(region) || !name_ok(column0) || first_day < TWOFOLD_DAY_MIN ||
      first_day > TWOFOLD_DAY_MAX ||
      (length > 0 &&
       (int64_t)first_day + (int64_t)length - 1 > TWOFOLD_DAY_MAX) ||
      length > SIZE_MAX / sizeof(double))
    return TWOFOLD_EINVAL;
  twofold_series *s = calloc(1, sizeof *s);
  if (s == NULL)
    return TWOFOLD_ENOMEM;
  s->region = tf_strdup(region);
  s->first_day = first_day;
  s->length = length;
  if (s->region == NULL) {
    free(s);
    return TWOFOLD_ENOMEM;
  }
  size_t idx;
  int rc = twofold_series_add_column(s, column0, &idx);
  if (rc) {
    twofold_series_free(s);
    return rc;
  }
  *out = s;
  return TWOFOLD_OK;
}

int twofold_series_from_counts(const char *region, int32_t first_day,
                               const double *values, size_t length,
                               const char *column0, twofold_series **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  *out = NULL;
  if (values == NULL && length > 0)
    return TWOFOLD_EINVAL;
  for (size_t i = 0; i < length; i++)
    if (!tf_count_ok(values[i]))
      return TWOFOLD_ECOUNT;
  twofold_series *s;
  int rc = twofold_series_new(region, first_day, length, column0, &s);
  if (rc)
    return rc;
  if (length > 0)
    memcpy(s->values[0], values, length * sizeof(double));
  *out = s;
  return TWOFOLD_OK;
}

int twofold_series_copy(const twofold_series *src, twofold_series **out) {
  if (src == NULL || out == NULL)
    return TWOFOLD_EINVAL;
  *out = NULL;
  twofold_series *s;
  int rc = twofold_series_from_counts(src->region, src->first_day,
                                      src->values[0], src->length,
                                      src->names[0], &s);
  if (rc)
    return rc;
  for (size_t c = 1; c < src->ncol; c++) {
    size_t idx;
    rc = twofold_series_add_column(s, src->names[c], &idx);
    if (rc) {
      twofold_series_free(s);
      return rc;
    }
    if (src->length > 0)
      memcpy(s->values[idx], src->values[c], src->length * sizeof(double));
  }
  *out = s;
  return TWOFOLD_OK;
}

void twofold_series_free(twofold_series *s) {
  if (s == NULL)
    return;
  for (size_t c = 0; c < s->ncol; c++) {
    free(s->names[c]);
    free(s->values[c]);
  }
  free(s->names);
  free(s->values);
  free(s->region);
  free(s);
}

int twofold_series_add_column(twofold_series *s, const char *name,
                              size_t *index) {
  if (s == NULL || !name_ok(name))
    return TWOFOLD_EINVAL;
  for (size_t c = 0; c < s->ncol; c++)
    if (strcmp(s->names[c], name) == 0)
      return TWOFOLD_EDUPLICATE;
  if (s->ncol == s->cap) {
    size_t cap = s->cap ? 2 * s->cap : 2;
    char **names = realloc(s->names, cap * sizeof *names);
    if (names == NULL)
      return TWOFOLD_ENOMEM;
    s->names = names;
    double **values = realloc(s->values, cap * sizeof *values);
    if (values == NULL)
      return TWOFOLD_ENOMEM;
    s->values = values;
    s->cap = cap;
  }
  char *nm = tf_strdup(name);
  double *v = malloc((s->length ? s->length : 1) * sizeof *v);
  if (nm == NULL || v == NULL) {
    free(nm);
    free(v);
    return TWOFOLD_ENOMEM;
  }
  for (size_t i = 0; i < s->length; i++)
    v[i] = NAN;
  s->names[s->ncol] = nm;
  s->values[s->ncol] = v;
  if (index)
    *index = s->ncol;
  s->ncol++;
  return TWOFOLD_OK;
}

int twofold_series_set(twofold_series *s, size_t col, size_t i,
                       double value) {
  if (s == NULL || col >= s->ncol || i >= s->length)
    return TWOFOLD_EINVAL;
  if (!tf_count_ok(value))
    return TWOFOLD_ECOUNT;
  s->values[col][i] = value;
  return TWOFOLD_OK;
}

const char *twofold_series_region(const twofold_series *s) {
  return s ? s->region : NULL;
}

int32_t twofold_series_first_day(const twofold_series *s) {
  return s ? s->first_day : 0;
}

size_t twofold_series_length(const twofold_series *s) {
  return s ? s->length : 0;
}

size_t twofold_series_columns(const twofold_series *s) {
  return s ? s->ncol : 0;
}

const char *twofold_series_column_name(const twofold_series *s, size_t col) {
  return s && col < s->ncol ? s->names[col] : NULL;
}

int twofold_series_column_index(const twofold_series *s, const char *name) {
  if (s == NULL || name == NULL)
    return TWOFOLD_EINVAL;
  for (size_t c = 0; c < s->ncol; c++)
    if (strcmp(s->names[c], name) == 0)
      return (int)c;
  return TWOFOLD_ENOTFOUND;
}

const double *twofold_series_values(const twofold_series *s, size_t col) {
  return s && col < s->ncol ? s->values[col] : NULL;
}

size_t twofold_series_missing(const twofold_series *s, size_t col) {
  if (s == NULL || col >= s->ncol)
    return 0;
  size_t n = 0;
  for (size_t i = 0; i < s->length; i++)
    n += tf_isnan(s->values[col][i]);
  return n;
}

double twofold_series_total(const twofold_series *s, size_t col) {
  if (s == NULL || col >= s->ncol)
    return 0.0;
  double t = 0.0;
  for (size_t i = 0; i < s->length; i++)
    if (!tf_isnan(s->values[col][i]))
      t += s->values[col][i];
  return t;
}

size_t twofold_series_gaps(const twofold_series *s, size_t col) {
  if (s == NULL || col >= s->ncol)
    return 0;
  size_t n = 0;
  const double *v = s->values[col];
  for (size_t i = 0; i < s->length; i++)
    if (tf_isnan(v[i]) && (i == 0 || !tf_isnan(v[i - 1])))
      n++;
  return n;
}

int twofold_series_gap(const twofold_series *s, size_t col, size_t k,
                       size_t *start, size_t *length) {
  if (s == NULL || col >= s->ncol)
    return TWOFOLD_EINVAL;
  const double *v = s->values[col];
  size_t seen = 0;
  for (size_t i = 0; i < s->length; i++) {
    if (tf_isnan(v[i]) && (i == 0 || !tf_isnan(v[i - 1]))) {
      if (seen == k) {
        size_t j = i;
        while (j < s->length && tf_isnan(v[j]))
          j++;
        if (start)
          *start = i;
        if (length)
          *length = j - i;
        return TWOFOLD_OK;
      }
      seen++;
    }
  }
  return TWOFOLD_ENOTFOUND;
}
