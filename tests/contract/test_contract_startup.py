"""Start-up stays light: loading a campaign imports none of the heavy optional packages.

Not timed (timings belong to benchmarks/): the check is which modules a fresh process holds
after ``import polarbeam`` and ``load_campaign`` of the demo.
"""

import json
import subprocess
import sys
from pathlib import Path

import pytest

from polarbeam._util.optional import lazy
from polarbeam.errors import MissingExtraError

DEMO = Path(__file__).resolve().parents[2] / "examples" / "demo" / "campaign.toml"
HEAVY = ("pandas", "rdkit", "pint", "dask", "pyarrow", "lmfit", "matplotlib", "pyscf",
         "scipy.interpolate", "scipy.stats", "scipy.optimize", "scipy.integrate")  # fmt: skip


def test_loading_the_demo_imports_no_heavy_package():
    code = (
        "import json, sys, polarbeam;"
        f"c = polarbeam.load_campaign({str(DEMO)!r});"
        f"print(json.dumps([len(c.compounds), [m for m in {HEAVY!r} if m in sys.modules]]))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    n, loaded = json.loads(out.stdout)
    assert n == 6
    assert loaded == []


def test_lazy_module_imports_on_first_use_and_names_the_extra():
    m = lazy("json", "reading records")
    assert "not loaded yet" in repr(m)
    assert m.dumps([1]) == "[1]"
    assert "loaded" in repr(m) and "not" not in repr(m)
    missing = lazy("polarbeam_no_such_package", "drawing")
    with pytest.raises(MissingExtraError, match=r"^drawing needs polarbeam_no_such_package"):
        _ = missing.anything
