/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Replay fuzz inputs without libFuzzer: each argument is a file or a
 * directory of files (read in sorted order), and each file is passed once
 * to LLVMFuzzerTestOneInput.  A broken promise aborts (FUZZ_CHECK), a
 * memory error shows up under the sanitizer build (make check-sanitize). */
#include "fuzz.h"

#include <dirent.h>
#include <errno.h>
#include <string.h>
#include <sys/stat.h>

static int replay_file(const char *path, long *count) {
  FILE *f = fopen(path, "rb");
  if (!f) {
    fprintf(stderr, "replay: %s: %s\n", path, strerror(errno));
    return 1;
  }
  size_t cap = 4096, n = 0;
  uint8_t *buf = malloc(cap);
  if (!buf) {
    fclose(f);
    fprintf(stderr, "replay: out of memory\n");
    return 1;
  }
  for (;;) {
    if (n == cap) {
      uint8_t *nb = realloc(buf, cap * 2);
      if (!nb) {
        free(buf);
        fclose(f);
        fprintf(stderr, "replay: out of memory\n");
        return 1;
      }
      buf = nb;
      cap *= 2;
    }
    size_t got = fread(buf + n, 1, cap - n, f);
    n += got;
    if (got == 0)
      break;
  }
  int bad = ferror(f);
  fclose(f);
  if (bad) {
    free(buf);
    fprintf(stderr, "replay: %s: read error\n", path);
    return 1;
  }
  /* libFuzzer passes a buffer of exactly the input's size: copy it so that
   * an overread is caught by the sanitizers. */
  uint8_t *exact = malloc(n ? n : 1);
  if (!exact) {
    free(buf);
    return 1;
  }
  if (n)
    memcpy(exact, buf, n);
  free(buf);
  LLVMFuzzerTestOneInput(exact, n);
  free(exact);
  (*count)++;
  return 0;
}

static int cmp_names(const void *a, const void *b) {
  return strcmp(*(char *const *)a, *(char *const *)b);
}

static int replay_path(const char *path, long *count) {
  struct stat st;
  if (stat(path, &st) != 0) {
    fprintf(stderr, "replay: %s: %s\n", path, strerror(errno));
    return 1;
  }
  if (!S_ISDIR(st.st_mode))
    return replay_file(path, count);
  DIR *d = opendir(path);
  if (!d) {
    fprintf(stderr, "replay: %s: %s\n", path, strerror(errno));
    return 1;
  }
  char **names = NULL;
  size_t nn = 0, cap = 0;
  int rc = 0;
  struct dirent *e;
  while ((e = readdir(d)) != NULL) {
    if (e->d_name[0] == '.')
      continue; /* ., .., .keep */
    if (nn == cap) {
      size_t nc = cap ? cap * 2 : 64;
      char **nb = realloc(names, nc * sizeof *nb);
      if (!nb) {
        rc = 1;
        break;
      }
      names = nb;
      cap = nc;
    }
    size_t len = strlen(path) + strlen(e->d_name) + 2;
    names[nn] = malloc(len);
    if (!names[nn]) {
      rc = 1;
      break;
    }
    snprintf(names[nn], len, "%s/%s", path, e->d_name);
    nn++;
  }
  closedir(d);
  if (nn)
    qsort(names, nn, sizeof *names, cmp_names);
  for (size_t i = 0; i < nn; i++) {
    if (rc == 0)
      rc = replay_path(names[i], count);
    free(names[i]);
  }
  free(names);
  return rc;
}

int main(int argc, char **argv) {
  long count = 0;
  int rc = 0;
  for (int i = 1; i < argc && rc == 0; i++)
    rc = replay_path(argv[i], &count);
  printf("replay: %ld inputs replayed%s\n", count, rc ? " (error)" : "");
  return rc;
}
