# SPDX-License-Identifier: GPL-3.0-or-later
"""Test set-up: import twofold from this source tree (bindings/python).

The library comes from TWOFOLD_LIBRARY (tests/python-bindings.sh points it
at the build tree's lib/.libs/libtwofold.so) or the installed one.
"""
import os
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)),
                                os.pardir))
