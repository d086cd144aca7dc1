/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * use-api - a small program using the installed libtwofold.
 *
 *   cc use-api.c $(pkg-config --cflags --libs twofold) -o use-api
 *   ./use-api examples/demo.csv
 *
 * Reads a long CSV of daily counts (region,date,cases,...) and prints one
 * tab-separated line per region, in byte order of the region names: the
 * first and last date, the number of days spanned, the days without a
 * cases value, the days without an admissions value ("-" if the file has
 * no admissions column) and the total of the cases.
 */
#include <twofold.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int by_region(const void *a, const void *b) {
  const twofold_series *const *x = a, *const *y = b;
  return strcmp(twofold_series_region(*x), twofold_series_region(*y));
}

static int print_series(const twofold_series *s) {
  int cases = twofold_series_column_index(s, "cases");
  if (cases < 0) {
    fprintf(stderr, "use-api: %s: no cases column\n",
            twofold_series_region(s));
    return -1;
  }
  int adm = twofold_series_column_index(s, "admissions");
  int32_t first = twofold_series_first_day(s);
  size_t n = twofold_series_length(s);
  char d0[16] = "-", d1[16] = "-";
  if (n > 0 &&
      (twofold_date_format(first, d0, sizeof d0) != 0 ||
       twofold_date_format(first + (int32_t)(n - 1), d1, sizeof d1) != 0)) {
    fprintf(stderr, "use-api: %s: date out of range\n",
            twofold_series_region(s));
    return -1;
  }
  char adm_missing[32] = "-";
  if (adm >= 0)
    snprintf(adm_missing, sizeof adm_missing, "%zu",
             twofold_series_missing(s, (size_t)adm));
  printf("%s\t%s\t%s\t%zu\t%zu\t%s\t%.0f\n", twofold_series_region(s), d0, d1,
         n, twofold_series_missing(s, (size_t)cases), adm_missing,
         twofold_series_total(s, (size_t)cases));
  return 0;
}

int main(int argc, char **argv) {
  if (argc != 2) {
    fputs("usage: use-api FILE.csv\n", stderr);
    return 2;
  }
  twofold_set *set = NULL;
  twofold_error err;
  memset(&err, 0, sizeof err);
  int rc = twofold_read_file(argv[1], NULL, &set, &err);
  if (rc != 0) {
    fprintf(stderr, "use-api: %s (%s)\n",
            err.text[0] != '\0' ? err.text : argv[1], twofold_strerror(rc));
    return 1;
  }
  size_t n = twofold_set_count(set);
  const twofold_series **list = malloc((n > 0 ? n : 1) * sizeof *list);
  if (list == NULL) {
    fputs("use-api: out of memory\n", stderr);
    twofold_set_free(set);
    return 1;
  }
  for (size_t i = 0; i < n; i++)
    list[i] = twofold_set_at(set, i);
  qsort(list, n, sizeof *list, by_region);
  printf("region\tfirst\tlast\tdays\tmissing_cases\tmissing_admissions\t"
         "total_cases\n");
  int status = 0;
  for (size_t i = 0; i < n; i++)
    if (print_series(list[i]) != 0)
      status = 1;
  free(list);
  twofold_set_free(set);
  if (fflush(stdout) != 0)
    status = 1;
  return status;
}
