"""Tests of fitdrag._lazy and the lazy package faces (fitdrag, fitdrag.video, fitdrag.tracks).

regression: importing the package face loads no stage; every public name resolves to the
object its defining module holds; the installed distribution's version is the one in
fitdrag/_version.py (PEP 562 module __getattr__; PEP 566 metadata).
"""

from __future__ import annotations

import importlib
import importlib.metadata
import math
import subprocess
import sys

import pytest

import fitdrag
from fitdrag._lazy import lazy_face


@pytest.mark.parametrize("package", ["fitdrag", "fitdrag.video", "fitdrag.tracks"])
def test_every_public_name_resolves_to_its_defining_module(package):
    """regression: each name in __all__ is the object of the module _WHERE names."""
    pkg = importlib.import_module(package)
    names = [n for n in pkg.__all__ if n != "__version__"]
    assert names, package
    for name in names:
        module = importlib.import_module(pkg._WHERE[name])
        assert getattr(pkg, name) is getattr(module, name), name
    assert sorted(dir(pkg)) == sorted(pkg._WHERE)


def test_unknown_name_is_an_attribute_error():
    """regression: an unknown attribute fails as Python's own would."""
    with pytest.raises(AttributeError, match=r"^module 'fitdrag' has no attribute 'nothing'$"):
        fitdrag.nothing  # noqa: B018
    getattr_, dir_ = lazy_face("pkg", {"pi": "math"})
    assert getattr_("pi") == math.pi
    with pytest.raises(AttributeError, match=r"^module 'pkg' has no attribute 'tau'$"):
        getattr_("tau")
    assert dir_() == ["pi"]


def test_import_loads_no_stage():
    """regression: `import fitdrag` (and reading its version) loads none of the stages and
    none of the heavy libraries (fresh interpreter)."""
    code = (
        "import sys, fitdrag; fitdrag.__version__; "
        "print(sorted(m for m in sys.modules if m.startswith('fitdrag') or m in "
        "('numpy', 'numba', 'scipy', 'cv2', 'matplotlib', 'pint')))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "['fitdrag', 'fitdrag._lazy', 'fitdrag._version']"


def test_version_matches_the_installed_metadata():
    """regression: the version has one source; the installed metadata reads it from there."""
    assert fitdrag.__version__ == importlib.metadata.version("fitdrag")
