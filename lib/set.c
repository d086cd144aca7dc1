/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Sets of series: lookup by region name, iteration, and the total. */
#include "internal.h"
#include "series.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

size_t tf_hash_str(const char *s) {
  uint64_t h = 1469598103934665603ULL;
  for (; *s; s++) {
    h ^= (unsigned char)*s;
    h *= 1099511628211ULL;
  }
  return (size_t)h;
}

int twofold_set_new(twofold_set **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  *out = calloc(1, sizeof **out);
  return *out ? TWOFOLD_OK : TWOFOLD_ENOMEM;
}

void twofold_set_free(twofold_set *set) {
  if (set == NULL)
    return;
  for (size_t i = 0; i < set->n; i++)
    twofold_series_free(set->items[i]);
  free(set->items);
  free(set->slots);
  free(set);
}

static size_t *slot_for(const twofold_set *set, const char *region) {
  size_t mask = set->nslots - 1;
  size_t i = tf_hash_str(region) & mask;
  while (set->slots[i] != 0 &&
         strcmp(set->items[set->slots[i] - 1]->region, region) != 0)
    i = (i + 1) & mask;
  return &set->slots[i];
}

static int rehash(twofold_set *set, size_t nslots) {
  size_t *slots = calloc(nslots, sizeof *slots);
  if (slots == NULL)
    return TWOFOLD_ENOMEM;
  free(set->slots);
  set->slots = slots;
  set->nslots = nslots;
  for (size_t k = 0; k < set->n; k++)
    *slot_for(set, set->items[k]->region) = k + 1;
  return TWOFOLD_OK;
}

int twofold_set_add(twofold_set *set, twofold_series *s) {
  if (set == NULL || s == NULL)
    return TWOFOLD_EINVAL;
  if (twofold_set_find(set, s->region) != NULL)
    return TWOFOLD_EDUPLICATE;
  if (set->n == set->cap) {
    size_t cap = set->cap ? 2 * set->cap : 8;
    twofold_series **items = realloc(set->items, cap * sizeof *items);
    if (items == NULL)
      return TWOFOLD_ENOMEM;
    set->items = items;
    set->cap = cap;
  }
  if (2 * (set->n + 1) > set->nslots) {
    int rc = rehash(set, set->nslots ? 2 * set->nslots : 16);
    if (rc)
      return rc;
  }
  set->items[set->n] = s;
  *slot_for(set, s->region) = set->n + 1;
  set->n++;
  return TWOFOLD_OK;
}

size_t twofold_set_count(const twofold_set *set) { return set ? set->n : 0; }

const twofold_series *twofold_set_at(const twofold_set *set, size_t i) {
  return set && i < set->n ? set->items[i] : NULL;
}

const twofold_series *twofold_set_find(const twofold_set *set,
                                       const char *region) {
  if (set == NULL || region == NULL || set->nslots == 0)
    return NULL;
  size_t k = *slot_for(set, region);
  return k ? set->items[k - 1] : NULL;
}

int twofold_set_total(const twofold_set *set, const char *region,
                      twofold_series **out) {
  if (set == NULL || region == NULL || out == NULL)
    return TWOFOLD_EINVAL;
  *out = NULL;
  if (set->n == 0)
    return TWOFOLD_EEMPTY;
  int64_t lo = INT64_MAX, hi = INT64_MIN;
  for (size_t k = 0; k < set->n; k++) {
    const twofold_series *s = set->items[k];
    if (s->length == 0)
      continue;
    if (s->first_day < lo)
      lo = s->first_day;
    if ((int64_t)s->first_day + (int64_t)s->length - 1 > hi)
      hi = (int64_t)s->first_day + (int64_t)s->length - 1;
  }
  size_t len = lo <= hi ? (size_t)(hi - lo + 1) : 0;
  const twofold_series *s0 = set->items[0];
  twofold_series *t;
  int rc = twofold_series_new(region, lo <= hi ? (int32_t)lo : s0->first_day,
                              len, s0->names[0], &t);
  if (rc)
    return rc;
  for (size_t c = 0; c < s0->ncol; c++) {
    /* the column must exist in every series */
    int everywhere = 1;
    for (size_t k = 1; k < set->n && everywhere; k++)
      everywhere = twofold_series_column_index(set->items[k],
                                               s0->names[c]) >= 0;
    if (!everywhere) {
      if (c == 0) { /* the primary column must be common */
        twofold_series_free(t);
        return TWOFOLD_ENOTFOUND;
      }
      continue;
    }
    size_t tc = 0;
    if (c > 0 && (rc = twofold_series_add_column(t, s0->names[c], &tc))) {
      twofold_series_free(t);
      return rc;
    }
    double *dst = t->values[tc];
    for (size_t i = 0; i < len; i++)
      dst[i] = 0.0;
    for (size_t k = 0; k < set->n; k++) {
      const twofold_series *s = set->items[k];
      const double *v = s->values[twofold_series_column_index(s, s0->names[c])];
      int64_t off = (int64_t)s->first_day - lo;
      for (size_t i = 0; i < len; i++) {
        int64_t j = (int64_t)i - off;
        if (j < 0 || j >= (int64_t)s->length || tf_isnan(v[j]))
          dst[i] = NAN;
        else
          dst[i] += v[j];
      }
    }
  }
  *out = t;
  return TWOFOLD_OK;
}
