/* SPDX-License-Identifier: GPL-3.0-or-later */
#include "cli.h"
int tf_cli_placeholder_(void); int tf_cli_placeholder_(void) { return 0; }
