/* SPDX-License-Identifier: GPL-3.0-or-later */
#include <stdlib.h>
int main(void) { return 77; }
