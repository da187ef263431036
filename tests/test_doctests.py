"""The Examples sections of the public API run as doctests (numpydoc convention)."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import driftband


def _modules() -> list[str]:
    names = [m.name for m in pkgutil.walk_packages(driftband.__path__, "driftband.")]
    return ["driftband"] + [n for n in names if n != "driftband.__main__"]  # it runs main()


@pytest.mark.parametrize("name", _modules())
def test_examples_run(name):
    mod = importlib.import_module(name)
    res = doctest.testmod(mod, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert res.failed == 0, f"{res.failed} of {res.attempted} examples failed in {name}"
