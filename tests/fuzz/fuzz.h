/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Shared by the fuzz harnesses, their libFuzzer builds (make fuzz) and the
 * replay program that runs the committed corpora and regression inputs
 * under make check. */
#ifndef TWOFOLD_FUZZ_H
#define TWOFOLD_FUZZ_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

/* The entry point libFuzzer calls (and replay.c calls for each file). */
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* A broken promise of the header is a bug: report it and abort, so that
 * libFuzzer records the input and the replay test fails. */
#define FUZZ_CHECK(cond)                                                     \
  do {                                                                       \
    if (!(cond)) {                                                           \
      fprintf(stderr, "%s:%d: broken promise: %s\n", __FILE__, __LINE__,      \
              #cond);                                                        \
      abort();                                                               \
    }                                                                        \
  } while (0)

/* A cursor over the fuzzer's bytes; reading past the end gives zeros. */
typedef struct fuzz_bytes {
  const uint8_t *p;
  size_t n;
} fuzz_bytes;

static inline uint8_t fuzz_u8(fuzz_bytes *b) {
  if (b->n == 0)
    return 0;
  b->n--;
  return *b->p++;
}

static inline uint16_t fuzz_u16(fuzz_bytes *b) {
  uint16_t v = fuzz_u8(b);
  return (uint16_t)(v | (uint16_t)fuzz_u8(b) << 8);
}

static inline uint32_t fuzz_u32(fuzz_bytes *b) {
  uint32_t v = fuzz_u16(b);
  return v | (uint32_t)fuzz_u16(b) << 16;
}

static inline uint64_t fuzz_u64(fuzz_bytes *b) {
  uint64_t v = fuzz_u32(b);
  return v | (uint64_t)fuzz_u32(b) << 32;
}

#endif
