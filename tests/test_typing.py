"""Type annotations of the public API, and the type checker over the package.

Common practice in typed scientific-Python packages: every public function is annotated
(arguments and return value) and mypy passes over the package; the settings live in
``pyproject.toml`` under ``[tool.mypy]``.
"""

from __future__ import annotations

import importlib
import inspect
import pkgutil
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

import driftband

ROOT = Path(__file__).resolve().parents[1]


def _public_modules() -> list[str]:
    names = ["driftband"]
    for info in pkgutil.walk_packages(driftband.__path__, "driftband."):
        if not any(part.startswith("_") for part in info.name.split(".")[1:]):
            names.append(info.name)
    return names


def _public_functions():
    for modname in _public_modules():
        mod = importlib.import_module(modname)
        for name, obj in vars(mod).items():
            if name.startswith("_") or getattr(obj, "__module__", None) != modname:
                continue
            if inspect.isfunction(obj):
                yield f"{modname}.{name}", obj
            elif inspect.isclass(obj):
                for mname, meth in vars(obj).items():
                    if mname.startswith("_") and mname != "__init__":
                        continue
                    fn = meth.__func__ if isinstance(meth, (staticmethod, classmethod)) else meth
                    if isinstance(fn, property):
                        fn = fn.fget
                    if inspect.isfunction(fn) and fn.__qualname__.startswith(obj.__name__):
                        yield f"{modname}.{name}.{mname}", fn


def _missing(fn) -> list[str]:
    sig = inspect.signature(fn)
    out = [
        p.name
        for p in sig.parameters.values()
        if p.name not in ("self", "cls") and p.annotation is inspect.Parameter.empty
    ]
    if sig.return_annotation is inspect.Signature.empty and fn.__name__ != "__init__":
        out.append("return")
    return out


def test_every_public_function_is_annotated():
    bad = [f"{name}: {', '.join(m)}" for name, fn in _public_functions() if (m := _missing(fn))]
    assert not bad, "public functions without annotations:\n" + "\n".join(bad)


def test_mypy_passes_over_the_package():
    mypy = shutil.which("mypy")
    if mypy is None:  # pragma: no cover - mypy is in the test extra
        pytest.skip("mypy is not installed (pip install '.[test]')")
    res = subprocess.run([sys.executable, "-m", "mypy"], cwd=ROOT, capture_output=True, text=True)
    assert res.returncode == 0, res.stdout[-4000:] + res.stderr[-2000:]
