# TEMPORARY (replaced by the split branch)
import sys

from polarbeam import scansim as _m

sys.modules[__name__] = _m
