/* SPDX-License-Identifier: GPL-3.0-or-later */
/* ISO 8601 calendar dates and day numbers (day 0 = 1970-01-01), proleptic
 * Gregorian.  The conversions are the era-based civil-from-days algorithms
 * (H. Hinnant, "chrono-Compatible Low-Level Date Algorithms", 2013), which
 * are exact for every date in range. */
#include "internal.h"

#include <stdio.h>

int twofold_date_is_leap(int y) {
  return (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
}

static int days_in_month(int y, int m) {
  static const int dm[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  return m == 2 && twofold_date_is_leap(y) ? 29 : dm[m - 1];
}

int twofold_date_from_ymd(int y, int m, int d, int32_t *out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  if (y < 1 || y > 9999 || m < 1 || m > 12 || d < 1 ||
      d > days_in_month(y, m))
    return TWOFOLD_EDATE;
  long yy = y - (m <= 2);
  long era = (yy >= 0 ? yy : yy - 399) / 400;
  long yoe = yy - era * 400;
  long doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
  long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
  *out = (int32_t)(era * 146097 + doe - 719468);
  return TWOFOLD_OK;
}

int twofold_date_to_ymd(int32_t day, int *year, int *month, int *mday) {
  if (day < TWOFOLD_DAY_MIN || day > TWOFOLD_DAY_MAX)
    return TWOFOLD_ERANGE;
  long z = (long)day + 719468;
  long era = (z >= 0 ? z : z - 146096) / 146097;
  long doe = z - era * 146097;
  long yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
  long y = yoe + era * 400;
  long doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
  long mp = (5 * doy + 2) / 153;
  long d = doy - (153 * mp + 2) / 5 + 1;
  long m = mp < 10 ? mp + 3 : mp - 9;
  if (year)
    *year = (int)(y + (m <= 2));
  if (month)
    *month = (int)m;
  if (mday)
    *mday = (int)d;
  return TWOFOLD_OK;
}

static int digits(const char *s, size_t n, int *v) {
  int x = 0;
  for (size_t i = 0; i < n; i++) {
    if (s[i] < '0' || s[i] > '9')
      return 0;
    x = x * 10 + (s[i] - '0');
  }
  *v = x;
  return 1;
}

int twofold_date_parse(const char *text, size_t len, int32_t *out) {
  int y, m, d;
  if (text == NULL || out == NULL)
    return TWOFOLD_EINVAL;
  if (len != 10 || text[4] != '-' || text[7] != '-' ||
      !digits(text, 4, &y) || !digits(text + 5, 2, &m) ||
      !digits(text + 8, 2, &d))
    return TWOFOLD_EDATE;
  return twofold_date_from_ymd(y, m, d, out);
}

int twofold_date_format(int32_t day, char *buf, size_t size) {
  int y, m, d;
  if (buf == NULL || size < 11)
    return TWOFOLD_EINVAL;
  int rc = twofold_date_to_ymd(day, &y, &m, &d);
  if (rc)
    return rc;
  snprintf(buf, size, "%04d-%02d-%02d", y, m, d);
  return TWOFOLD_OK;
}

int twofold_date_weekday(int32_t day) {
  /* 1970-01-01 was a Thursday (ISO weekday 4). */
  long w = ((long)day + 3) % 7;
  if (w < 0)
    w += 7;
  return (int)w + 1;
}
