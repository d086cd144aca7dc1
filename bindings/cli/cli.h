/* SPDX-License-Identifier: GPL-3.0-or-later */
#ifndef TWOFOLD_CLI_H
#define TWOFOLD_CLI_H
#endif
