# TEMPORARY (replaced by the split branch)
from polarbeam import computed as _c
from polarbeam import qchem as _q
from polarbeam import structure as _s

for _m in (_s, _c, _q):
    globals().update({k: v for k, v in vars(_m).items() if not k.startswith("__")})
