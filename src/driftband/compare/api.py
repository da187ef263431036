"""The compare stage: tests between pairs of populations, adjusted across pairs.

:func:`compare_fits` is the one orchestration of the comparisons, used by
``driftband compare`` and by ``driftband run``. Its options are checked by
:func:`check_compare_settings` before any work; messages name the option as the user
wrote it (a command-line flag or a study-file key, see :class:`driftband._options.OptionSource`).
"""

from __future__ import annotations

import itertools
import logging
import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from .._options import COMMAND_LINE, OptionSource
from .._parallel import parallel_map
from .._progress import Progress
from ..defaults import COMPARE_TESTS
from ..exceptions import InputError
from ..fit.options import FitOptions
from ..fit.results import PopulationFit
from ..prf.dfe import DfeExpectation
from .pair import ComparisonRow, compare_pair

__all__ = [
    "adjust_pvalues",
    "check_compare_settings",
    "compare_fits",
    "resolve_pairs",
    "study_model",
]

log = logging.getLogger("driftband")


def resolve_pairs(
    tokens: Sequence[str] | None,
    names: Sequence[str],
    source: OptionSource = COMMAND_LINE,
    holder: str = "the fit files hold",
) -> list[tuple[str, str]]:
    """Pairs given as ``A:B`` checked against the population names; every pair if none.

    Parameters
    ----------
    tokens : sequence of str or None
        ``A:B`` items; empty or None means all pairs of ``names`` in their order.
    names : sequence of str
        The populations available (``None`` skips the check of the names).
    source : OptionSource
        Where the option came from, for messages (``--pairs`` or ``[compare] pairs``).
    holder : str
        What holds the populations, for the message.

    Returns
    -------
    list of (str, str)

    Raises
    ------
    OptionError or InputError
        A malformed item or an unknown population.
    """
    if not tokens:
        return list(itertools.combinations(names, 2))
    pairs = []
    for tok in tokens:
        a, sep, b = tok.partition(":")
        if not sep or not a or not b:
            raise source.error("pairs", f"{tok!r}: write pairs as A:B")
        for nm in (a, b):
            if nm not in names:
                raise source.error(
                    "pairs", f"{tok!r}: no population {nm!r} ({holder} {', '.join(names)})"
                )
        pairs.append((a, b))
    return pairs


def check_compare_settings(
    tests: Sequence[str],
    adjust: str,
    pairs: Sequence[str] | None = None,
    source: OptionSource = COMMAND_LINE,
) -> None:
    """Check the tests, the adjustment method and the form of the pairs before any work.

    Raises
    ------
    OptionError or InputError
        An unknown test or method, or a pair not written as ``A:B``.
    """
    from statsmodels.stats.multitest import multipletests

    bad = [t for t in tests if t not in COMPARE_TESTS]
    if bad:
        raise source.error(
            "tests", f"unknown test {bad[0]!r}; choose from {', '.join(COMPARE_TESTS)}"
        )
    try:
        multipletests([0.5, 0.5], method=adjust)
    except ValueError:
        raise source.error(
            "adjust",
            f"{adjust!r} is not a method of "
            "statsmodels.stats.multitest (e.g. holm, fdr_bh, "
            "bonferroni)",
        ) from None
    for tok in pairs or []:
        a, sep, b = tok.partition(":")
        if not sep or not a or not b:
            raise source.error("pairs", f"write each pair as 'A:B', not {tok!r}")


def adjust_pvalues(rows: list[ComparisonRow], method: str = "holm") -> None:
    """Fill ``p_adjusted`` per test across pairs (statsmodels.stats.multitest).

    Parameters
    ----------
    rows : list of ComparisonRow
        Changed in place.
    method : str
        A method of :func:`statsmodels.stats.multitest.multipletests`.
    """
    from statsmodels.stats.multitest import multipletests

    for t in {r.test for r in rows}:
        sel = [r for r in rows if r.test == t and np.isfinite(r.p_value)]
        if not sel:
            continue
        _rej, padj, _a, _b = multipletests([r.p_value for r in sel], method=method)
        for r, p in zip(sel, padj):
            r.p_adjusted = float(p)
            r.adjust = method


def _warn_floor(rows: list[ComparisonRow], adjust: str, alpha: float = 0.05) -> None:
    """Warn when the bootstrap's p-value floor 2/(B+1), after the adjustment across pairs,
    cannot reach ``alpha``: no difference could then be called significant."""
    diff = [r for r in rows if r.test == "neutral_share_difference" and np.isfinite(r.p_value)]
    if not diff:
        return
    B = max(int(r.extra["replicates"]) for r in diff)
    floor = 2.0 / (B + 1)
    m = len(diff)
    reach = floor * (m if adjust.lower() in ("holm", "bonferroni") else 1)
    if reach > alpha:
        need = math.ceil(2 * (m if reach > floor else 1) / alpha) - 1
        log.warning(
            "neutral_share_difference: with B = %d bootstrap replicates the smallest "
            "p-value is 2/(B+1) = %.3g%s, so no pair can reach %g; use --bootstrap %d or "
            "more",
            B,
            floor,
            f", {reach:.3g} after {adjust} over {m} pairs" if m > 1 else "",
            alpha,
            need,
        )


def _compare_task(task: tuple[Any, ...]) -> list[ComparisonRow]:
    """One test of one pair (runs in a worker process)."""
    return compare_pair(*task)


def compare_fits(
    fits: Sequence[PopulationFit],
    options: FitOptions,
    model: str,
    *,
    pairs: Sequence[str] | None = None,
    tests: Sequence[str] = COMPARE_TESTS,
    relative_mu: dict[str, float] | None = None,
    adjust: str = "holm",
    source: OptionSource = COMMAND_LINE,
    holder: str = "the fit files hold",
    require_bootstrap: bool = False,
    workers: int | None = 1,
    scheduler: Any = None,
) -> list[ComparisonRow]:
    """Every requested test for every pair of populations, p-values adjusted across pairs.

    Parameters
    ----------
    fits : sequence of PopulationFit
        The populations (names unique), with their bootstrap for the share difference.
    options : FitOptions
        The options the fits were made with.
    model : str
        The model compared, e.g. ``gamma`` (fitted to every population of a pair).
    pairs : sequence of str, optional
        ``A:B`` items (default: every pair, in the order of ``fits``).
    tests : sequence of str
        Among :data:`~driftband.defaults.COMPARE_TESTS`; run in that order.
    relative_mu : dict of str to float, optional
        Relative mutation rates (default 1).
    adjust : str
        Multiple-testing method of statsmodels.
    source : OptionSource
        Where the options came from, for messages.
    holder : str
        What holds the populations, for messages (e.g. ``the study has``).
    require_bootstrap : bool
        Refuse to run ``neutral_share_difference`` on a population without bootstrap
        replicates (default: the row says that it has no interval and no p-value).
    workers : int, optional
        Worker processes, one task per pair and test (default 1: in this process).
    scheduler : str or distributed.Client, optional
        Run the tasks on this dask cluster instead of local workers.

    Returns
    -------
    list of ComparisonRow

    Raises
    ------
    OptionError or InputError
        Bad options, an unknown population, fewer than two populations.
    """
    check_compare_settings(tests, adjust, pairs, source)
    by_name = {pf.population: pf for pf in fits}
    names = list(by_name)
    mu = dict(relative_mu or {})
    for p, v in mu.items():
        if p not in by_name:
            raise source.error(
                "relative_mutation_rate",
                f"{p}=...: no population {p!r} ({holder} {', '.join(names)})",
            )
        if not v > 0:
            raise source.error("relative_mutation_rate", f"{p}={v}: must be > 0")
    chosen = resolve_pairs(pairs, names, source, holder)
    if not chosen:
        raise InputError(
            f"compare needs at least two populations; {holder} {', '.join(names) or 'none'}"
        )
    dfe = options.model(model)
    wanted = [t for t in COMPARE_TESTS if t in tests]
    if require_bootstrap and "neutral_share_difference" in wanted:
        for nm in dict.fromkeys(n for pair in chosen for n in pair):
            if by_name[nm].bootstrap is None:
                raise InputError(
                    f"population {nm!r}: the neutral-share difference needs "
                    "bootstrap replicates; rerun 'driftband fit' with "
                    "--bootstrap B"
                )
    for a, b in chosen:
        log.info("compare: %s and %s (%s model; %s)", a, b, dfe.name, ", ".join(wanted))
    tasks = [(by_name[a], by_name[b], dfe, options, mu, (t,)) for a, b in chosen for t in wanted]
    with Progress("compare", len(tasks), "tests") as prog:
        if scheduler is not None or (len(tasks) > 1 and (workers is None or workers > 1)):
            parts = parallel_map(
                _compare_task,
                tasks,
                workers=workers,
                scheduler=scheduler,
                name="compare",
                on_result=lambda _i, _r: prog.advance(),
            )
        else:
            cache: dict[int, DfeExpectation] = {}
            parts = []
            for t in tasks:
                parts.append(compare_pair(*t, cache))
                prog.advance()
    rows = [r for part in parts for r in part]
    adjust_pvalues(rows, adjust)
    _warn_floor(rows, adjust)
    if any("no bootstrap" in r.note for r in rows):
        log.warning(
            "neutral_share_difference has no interval or p-value: the fits have no "
            "bootstrap (rerun 'driftband fit' with --bootstrap B)"
        )
    return rows


def study_model(fits: list[Any], order: list[str] | None = None) -> str:
    """The model compared between populations: lowest AIC summed over all populations.

    Among the models fitted to every population, those that converged everywhere are
    preferred. The sum of AICs of separate fits is the AIC of the joint model.

    Parameters
    ----------
    fits : list of PopulationFit
    order : list of str, optional
        Tie-break order (the study's model order).

    Returns
    -------
    str
    """
    common = [m for m in (order or list(fits[0].fits)) if all(m in pf.fits for pf in fits)]
    if not common:
        raise InputError("no DFE model is fitted to every population")
    ok = [m for m in common if all(pf.fits[m].success for pf in fits)] or common
    return min(ok, key=lambda m: (sum(pf.fits[m].aic for pf in fits), ok.index(m)))
