"""The public surface: ``from driftband import *`` gives exactly ``__all__``."""

import driftband


def test_star_import():
    ns: dict = {}
    exec("from driftband import *", ns)
    names = {k for k in ns if not k.startswith("__")} | ({"__version__"} & set(ns))
    assert names == set(driftband.__all__)
    for name in driftband.__all__:
        assert getattr(driftband, name) is not None


def test_all_sorted_and_unique():
    assert list(driftband.__all__) == sorted(set(driftband.__all__))
