/* SPDX-License-Identifier: GPL-3.0-or-later */
#include "cp.h"

void twofold_online_free(twofold_online *on) { (void)on; }
