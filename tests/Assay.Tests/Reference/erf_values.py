#!/usr/bin/python3
"""Prints math.erf (Python standard library, C libm) at the points given on the command line, one per line."""
import math
import sys

for a in sys.argv[1:]:
    print(repr(math.erf(float(a))))
