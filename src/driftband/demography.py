"""Size histories read from files in the demes format (Gower et al. 2022).

A demes file (YAML, read by the ``demes`` package) describes demes, their epochs of
constant or exponentially changing size, and how they split, merge and exchange
migrants. driftband takes from it the size history of one population: the epochs of its
deme, continued back through its single ancestor (a split or a branch) to the root
deme's infinite ancestral epoch. Times become units of :math:`2N_{anc}` generations and
sizes ratios :math:`\\nu = N/N_{anc}`, with :math:`N_{anc}` the size of that ancestral
epoch: a :class:`driftband.prf.history.Epochs` history, the parameterisation of the
solver and of ``driftband simulate``.

Refused, each with one message naming the file and what to change: a file that is not a
valid demes graph, migrations or pulses (gene flow is not modelled), a deme with several
ancestors (admixture or a merge), a population that is no deme of the file, a deme that
does not reach the present (sampling time 0), an epoch whose size changes linearly, and
size ratios outside the solver's range.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from typing import Any

from .exceptions import InputError, OptionError
from .prf.history import Epochs

__all__ = ["DemesHistory", "read_demes_history"]


@dataclass(frozen=True)
class DemesHistory:
    """The size history of one population from a demes file.

    Attributes
    ----------
    population : str
        The deme's name.
    history : Epochs
        Epochs after the ancestral equilibrium, oldest first (units of 2 N_anc
        generations, size ratios to N_anc).
    ancestral_size : float
        :math:`N_{anc}`, diploid individuals.
    current_size : float
        The size at the sample (time 0).
    path : str
        The file.
    """

    population: str
    history: Epochs
    ancestral_size: float
    current_size: float
    path: str


def _load(path: str) -> Any:
    try:
        import demes
    except ImportError:  # pragma: no cover - a dependency; a broken installation
        raise OptionError(
            "reading a demes file needs the package 'demes' (pip install demes)"
        ) from None
    try:
        return demes.load(path)
    except FileNotFoundError:
        raise InputError("file not found", path) from None
    except IsADirectoryError:
        raise InputError("is a folder, not a demes file", path) from None
    except Exception as err:  # demes raises ValueError, TypeError, KeyError, YAML errors
        text = " ".join(str(err).split()) or type(err).__name__
        raise InputError(f"not a valid demes file: {text}", path) from None


def read_demes_history(path: str | os.PathLike, population: str) -> DemesHistory:
    """The size history of ``population`` from a demes file.

    Parameters
    ----------
    path : path-like
        A demes YAML file.
    population : str
        The name of the population's deme.

    Returns
    -------
    DemesHistory

    Raises
    ------
    InputError
        The file is missing or not a valid demes graph, or describes something the size
        history cannot hold (see the module docstring); the message names the file and
        the deme or epoch.

    Examples
    --------
    >>> import tempfile, os
    >>> d = tempfile.mkdtemp(); p = os.path.join(d, "lake.yaml")
    >>> _ = open(p, "w").write('''
    ... time_units: generations
    ... demes:
    ...   - name: lake
    ...     epochs:
    ...       - {start_size: 1000, end_time: 400}
    ...       - {start_size: 250}
    ... ''')
    >>> h = read_demes_history(p, "lake")
    >>> h.history.epochs(), h.ancestral_size, h.current_size
    ([(0.2, 0.25, 0.25)], 1000.0, 250.0)
    """
    p = os.fspath(path)
    g = _load(p)
    if g.migrations or g.pulses:
        raise InputError(
            "the graph has migrations or pulses; gene flow is not modelled: give a "
            "graph of size changes only (one deme per population)",
            p,
        )
    names = [d.name for d in g.demes]
    if population not in names:
        raise InputError(
            f"population {population!r} is not a deme of the file (demes: {', '.join(names)}); "
            "name the deme as the population is named in the sample table",
            p,
        )
    # time units per generation (demes: generation_time is 1 for generations)
    gen = 1.0 if g.time_units == "generations" else float(g.generation_time or 1.0)
    chain = []  # the deme, then its ancestors back to the root
    deme = g[population]
    while True:
        if len(deme.ancestors) > 1:
            raise InputError(
                f"deme {deme.name!r} has several ancestors ({', '.join(deme.ancestors)}): "
                "admixture and merges are not modelled; give one ancestor per deme",
                p,
            )
        chain.append(deme)
        if not deme.ancestors:
            break
        deme = g[deme.ancestors[0]]
    if chain[0].end_time != 0:
        raise InputError(
            f"deme {population!r} ends {chain[0].end_time:g} {g.time_units} before the "
            "present: the history must reach the sampling time 0",
            p,
        )
    out = []  # (start, end, start_size, end_size), oldest first
    root_first = list(reversed(chain))
    for k, deme in enumerate(root_first):
        # an ancestor counts until its descendant of the chain starts
        stop = root_first[k + 1].start_time if k + 1 < len(root_first) else 0.0
        for e in deme.epochs:
            if e.size_function not in ("constant", "exponential"):
                raise InputError(
                    f"deme {deme.name!r}, epoch from {e.start_time:g} to {e.end_time:g}: "
                    f"size function {e.size_function!r}; only constant and exponential "
                    "epochs are modelled",
                    p,
                )
            if e.start_time <= stop:
                break
            a, b, end = float(e.start_size), float(e.end_size), float(e.end_time)
            if end < stop:  # cut at the descendant's start: the size there
                if a != b:
                    rate = math.log(b / a) / (e.start_time - e.end_time)
                    b = a * math.exp(rate * (e.start_time - stop))
                end = stop
            out.append((float(e.start_time), end, a, b))
    root_start, _e, n_anc, n_anc_end = out[0]
    if not math.isinf(root_start) or n_anc != n_anc_end:  # demes ensures both; be explicit
        raise InputError("the root deme's first epoch must be infinite and constant", p)
    parts = []
    for start, end, a, b in out[1:]:
        duration = (start - end) / gen / (2.0 * n_anc)  # generations over 2 N_anc
        parts.append((duration, a / n_anc, b / n_anc))
    try:
        hist = Epochs(tuple(parts))
    except OptionError as err:
        raise InputError(f"deme {population!r}: {err}", p) from None
    current = out[-1][3] if len(out) > 1 else n_anc
    return DemesHistory(population, hist, float(n_anc), float(current), p)
