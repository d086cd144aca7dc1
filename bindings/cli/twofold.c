/* SPDX-License-Identifier: GPL-3.0-or-later */
#include "twofold.h"
#include <stdio.h>
int main(void) { printf("%s\n", twofold_version_string()); return 0; }
