/* SPDX-License-Identifier: GPL-3.0-or-later */
/* KINK changepoints: grid recursions (see changes.c and twofold.h). */
#include "cp.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

struct tf_kink {
  int unused;
};

void tf_kink_free(struct tf_kink *k) { free(k); }

int tf_kink_run(struct twofold_changes *ch) {
  return tf_msg_set(ch->msg, TWOFOLD_EINVAL, "kink not implemented yet");
}

int tf_kink_sample(const struct twofold_changes *ch, uint64_t seed,
                   size_t draws, unsigned char *change, double *rate,
                   size_t *count) {
  (void)ch; (void)seed; (void)draws; (void)change; (void)rate; (void)count;
  return TWOFOLD_EINVAL;
}
