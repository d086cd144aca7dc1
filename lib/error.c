/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Status codes, their names and messages (from TWOFOLD_ERRNO_MAP), the
 * caller-owned error report, and the version functions. */
#include "internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

const char *twofold_strerror(int code) {
  if (code == 0)
    return "success";
  switch (code) {
#define TF_XX(name, value, text)                                             \
  case value:                                                                \
    return text;
    TWOFOLD_ERRNO_MAP(TF_XX)
#undef TF_XX
  default:
    return "unknown error";
  }
}

const char *twofold_err_name(int code) {
  if (code == 0)
    return "TWOFOLD_OK";
  switch (code) {
#define TF_XX(name, value, text)                                             \
  case value:                                                                \
    return "TWOFOLD_E" #name;
    TWOFOLD_ERRNO_MAP(TF_XX)
#undef TF_XX
  default:
    return "TWOFOLD_EUNKNOWN";
  }
}

size_t twofold_error_size(void) { return sizeof(twofold_error); }

unsigned int twofold_version(void) { return TWOFOLD_VERSION_HEX; }

const char *twofold_version_string(void) { return TWOFOLD_VERSION_STRING; }

static void copy_trunc(char *dst, size_t size, const char *src) {
  size_t n = strlen(src);
  if (n >= size)
    n = size - 1;
  memcpy(dst, src, n);
  dst[n] = '\0';
}

int tf_error_set(twofold_error *err, int code, const char *file, long line,
                 long column, const char *fmt, ...) {
  if (err == NULL)
    return code;
  err->code = code;
  err->line = line;
  err->column = column;
  copy_trunc(err->file, sizeof err->file, file ? file : "");
  int off = 0;
  if (file && line > 0 && column > 0)
    off = snprintf(err->text, sizeof err->text, "%s:%ld:%ld: ", file, line,
                   column);
  else if (file && line > 0)
    off = snprintf(err->text, sizeof err->text, "%s:%ld: ", file, line);
  else if (file)
    off = snprintf(err->text, sizeof err->text, "%s: ", file);
  if (off < 0 || (size_t)off >= sizeof err->text)
    off = 0;
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(err->text + off, sizeof err->text - (size_t)off, fmt, ap);
  va_end(ap);
  return code;
}

int tf_msg_set(char *buf, int code, const char *fmt, ...) {
  if (buf == NULL)
    return code;
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(buf, TF_ERRMSG_SIZE, fmt, ap);
  va_end(ap);
  return code;
}

char *tf_strdup(const char *s) {
  size_t n = strlen(s) + 1;
  char *p = malloc(n);
  if (p)
    memcpy(p, s, n);
  return p;
}

