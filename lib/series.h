/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Layout of series and sets, private to the library. */
#ifndef TWOFOLD_SERIES_H
#define TWOFOLD_SERIES_H

#include "twofold.h"

struct twofold_series {
  char *region;
  int32_t first_day;
  size_t length;
  size_t ncol, cap;
  char **names;    /* ncol column names          */
  double **values; /* ncol arrays of length days */
};

struct twofold_set {
  size_t n, cap;
  twofold_series **items;
  /* open-addressing hash of region names -> index+1 (0 = empty) */
  size_t *slots;
  size_t nslots;
};

/* FNV-1a hash of a NUL-terminated string. */
size_t tf_hash_str(const char *s);

#endif
