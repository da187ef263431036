r"""The size history a DFE is fitted under: nuisance factors, equilibrium or explicit.

``--demography`` (and the study key ``demography``) takes one of

- ``nuisance`` (default): the nuisance factors :math:`r_i` of the likelihood absorb
  demography in both classes alike (Eyre-Walker, Woolfit & Phelps 2006); ``S`` is tied to
  no particular size;
- ``equilibrium``: constant size, all :math:`r_i = 1`;
- ``one-change``, ``two-change``, ``growth``: an explicit history
  (:mod:`driftband.prf.history`) fitted to the neutral class first, then the DFE fitted
  to the selected class given it (the two-step approach of Keightley & Eyre-Walker 2007
  and Boyko et al. 2008); ``S = 4Ns`` and :math:`\theta` are on the **current** size;
- ``auto``: per population, the explicit history (or equilibrium) with the lowest AIC
  on the neutral class; then the DFE fits under it against those with nuisance factors,
  by the lowest AIC of any family (both are likelihoods of both classes): the nuisance
  factors are kept when they win, and ``size_history`` then says so (model
  ``nuisance``);
- ``demes:FILE``: a fixed history read from a demes file (Gower et al. 2022), one deme
  named as the population.

With an explicit history the neutral expectation is the history's neutral spectrum
(:func:`~driftband.prf.neutral_history.neutral_history_sfs`) and the selected one the
DFE average of the history's spectra (:class:`~driftband.prf.history_table.HistoryKernel`),
with one :math:`\theta` shared by both classes. No I/O happens here (the fit stage,
:func:`driftband.fit.api.demes_histories`, reads a demes file).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..exceptions import OptionError
from ..prf.dfe import DfeExpectation
from ..prf.history import ConstantSize, Epochs, History
from ..prf.history_table import HistoryKernel
from .history_fit import HISTORY_MODELS, HistoryFit, fit_neutral_history, history_of
from .likelihood import SpectrumPair

__all__ = [
    "DEMOGRAPHY_CHOICES",
    "FittedHistory",
    "check_demography",
    "choose_history",
    "demes_path",
    "explicit",
    "recorded_history",
    "simulate_history_option",
    "history_of_summary",
    "history_parts",
    "prepare_history",
    "replicate_history",
]

#: The values of ``--demography`` (besides ``demes:FILE``).
DEMOGRAPHY_CHOICES = ("nuisance", "equilibrium", "one-change", "two-change", "growth", "auto")
#: The models ``auto`` chooses among (by AIC on the neutral class).
AUTO_MODELS = ("equilibrium", "one-change", "two-change", "growth")
_DEMES = "demes:"


def recorded_history(fit: Any) -> dict[str, Any] | None:
    """The explicit history a fit was made under (its ``size_history``), or None: for
    nuisance factors, equilibrium, or ``auto`` when it kept the nuisance factors."""
    h = getattr(fit, "size_history", None)
    return h if isinstance(h, dict) and h.get("model") != "nuisance" else None


def check_demography(value: Any, name: str = "--demography") -> str:
    """The demography choice, checked.

    Parameters
    ----------
    value : str
        One of :data:`DEMOGRAPHY_CHOICES` or ``demes:FILE``.
    name : str
        The option or key, for the message.

    Returns
    -------
    str

    Raises
    ------
    OptionError
        Anything else, naming the choices.

    Examples
    --------
    >>> check_demography("one-change")
    'one-change'
    """
    v = str(value).strip()
    if v in DEMOGRAPHY_CHOICES:
        return v
    if v.startswith(_DEMES) and v[len(_DEMES) :].strip():
        return _DEMES + v[len(_DEMES) :].strip()
    raise OptionError(
        f"{name} {value!r}: choose one of {', '.join(DEMOGRAPHY_CHOICES)}, or demes:FILE "
        "(a demes file with one deme per population)"
    )


def demes_path(demography: str) -> str | None:
    """The file of ``demes:FILE``, or None for any other choice.

    Examples
    --------
    >>> demes_path("demes:lake.yaml"), demes_path("auto")
    ('lake.yaml', None)
    """
    return demography[len(_DEMES) :].strip() if demography.startswith(_DEMES) else None


def explicit(demography: str) -> bool:
    """Whether ``demography`` asks for an explicit size history (fitted or from a file)."""
    return demography not in ("nuisance", "equilibrium")


@dataclass
class FittedHistory:
    """The size history of one population and the spectra a DFE fit needs under it.

    Attributes
    ----------
    model : str
        ``equilibrium``, ``one-change``, ``two-change``, ``growth`` or ``demes``.
    history : History
    fit : HistoryFit or None
        The fit to the neutral class (None for a history read from a file).
    candidates : dict of str to float
        AIC on the neutral class of each model ``auto`` compared (empty otherwise).
    source : str
        What was asked (``auto``, a model name, or ``demes:FILE``).
    expectation : DfeExpectation
        DFE averages of the history's spectra (S on the current size).
    neutral_g : ndarray, shape (n - 1,)
        The history's neutral spectrum per θL on the current size.
    """

    model: str
    history: History
    fit: HistoryFit | None
    candidates: dict[str, float]
    source: str
    expectation: DfeExpectation = field(repr=False)
    neutral_g: np.ndarray = field(repr=False)

    @property
    def n_params(self) -> int:
        """Free parameters of the history (0 when read from a file)."""
        return 0 if self.fit is None else len(HISTORY_MODELS[self.model])

    @property
    def params(self) -> dict[str, float]:
        """Size ratios and times of the history (empty for equilibrium or a file)."""
        return dict(self.fit.params) if self.fit is not None else {}

    def summary(self) -> dict[str, Any]:
        """A JSON-ready record: model, parameters, the neutral-class fit, candidates."""
        out: dict[str, Any] = {
            "requested": self.source,
            "model": self.model,
            "params": self.params,
            "epochs": [list(e) for e in self.history.epochs()],
            "nu_now": float(self.history.nu_now),
            "S_refers_to": "current size",
        }
        if self.fit is not None:
            out["neutral_fit"] = {
                "loglik": self.fit.loglik,
                "aic": self.fit.aic,
                "theta_ancestral": self.fit.theta,
                "misorientation_rate": self.fit.eps,
                "at_bounds": list(self.fit.at_bounds),
                "success": self.fit.success,
            }
        if self.candidates:
            out["candidates_aic"] = dict(self.candidates)
        return out


def prepare_history(
    data: SpectrumPair,
    demography: str,
    eps: float | None = None,
    fixed: History | None = None,
    beneficial: bool = False,
) -> FittedHistory:
    """Fit (or take) the size history of one population and tabulate its spectra.

    Parameters
    ----------
    data : SpectrumPair
        The population's spectra (the history is fitted to the neutral class).
    demography : str
        An explicit choice of :data:`DEMOGRAPHY_CHOICES` (``one-change``, ``two-change``,
        ``growth``, ``auto``) or ``demes:FILE``.
    eps : float or None
        Misorientation rate fixed at this value, or None to estimate it.
    fixed : History, optional
        The history of ``demes:FILE`` for this population (read by the caller).
    beneficial : bool
        Tabulate the beneficial side of the spectra too (a model with a beneficial
        class is fitted).

    Returns
    -------
    FittedHistory

    Raises
    ------
    OptionError
        ``nuisance`` or ``equilibrium`` (no explicit history), a demes choice without
        its history, or a history the neutral spectrum cannot identify.
    """
    demography = check_demography(demography)
    if not explicit(demography):
        raise OptionError(f"--demography {demography}: not an explicit size history")
    n = data.n
    if demography.startswith(_DEMES):
        if fixed is None:
            raise OptionError(f"--demography {demography}: the demes history was not read")
        ex, neutral_g = _parts(n, fixed, bool(beneficial))
        return FittedHistory("demes", fixed, None, {}, demography, ex, neutral_g)
    best, candidates = choose_history(data, demography, eps)
    # the process's cache: bootstrap replicates of a fixed history and a comparison
    # after the fit reuse the table
    ex, neutral_g = _parts(n, best.history, bool(beneficial))
    return FittedHistory(best.model, best.history, best, candidates, demography, ex, neutral_g)


def choose_history(
    data: SpectrumPair, demography: str, eps: float | None = None
) -> tuple[HistoryFit, dict[str, float]]:
    """Fit the history model asked for (``auto``: each of :data:`AUTO_MODELS`) to the
    neutral class; return the fit (lowest AIC) and the AIC of each candidate.

    Raises
    ------
    OptionError
        A history asked for on folded spectra (only ``auto`` is taken there, and it
        then keeps equilibrium).
    """
    if data.folded and demography != "auto":
        raise OptionError(
            f"--demography {demography}: an explicit size history needs unfolded spectra "
            "(on folded spectra its size ratios and times are poorly identified); use "
            "nuisance or equilibrium, or polarise the spectra with an outgroup"
        )
    if demography != "auto":
        return fit_neutral_history(data, demography, eps), {}
    fits = [
        fit_neutral_history(data, m, eps)
        for m in (AUTO_MODELS if not data.folded else ("equilibrium",))
        if len(HISTORY_MODELS[m]) + 2 <= data.neutral.size
    ]
    fits = [f for f in fits if math.isfinite(f.aic)]
    best = min(fits, key=lambda f: f.aic)
    return best, {f.model: f.aic for f in fits}


def history_of_summary(summary: dict[str, Any]) -> History:
    """The history recorded in a fit's ``size_history`` (:meth:`FittedHistory.summary`)."""
    model = str(summary["model"])
    if model in HISTORY_MODELS:
        return history_of(model, {str(k): float(v) for k, v in summary["params"].items()})
    epochs = tuple((float(d), float(a), float(b)) for d, a, b in summary.get("epochs") or ())
    return Epochs(epochs) if epochs else ConstantSize()


def simulate_history_option(
    summary: dict[str, Any], population: str, ancestral_size: int = 1000
) -> str | None:
    """The ``driftband simulate --history`` value of a recorded history, for an ancestral
    size of ``ancestral_size`` (the spectra fix only 4·N_anc·μ, so N_anc is a choice), or
    None for a history with an exponential epoch (one epoch per generation) or none.

    Examples
    --------
    >>> simulate_history_option(
    ...     {"model": "one-change", "params": {"nu": 0.25, "tau": 0.05}}, "lake"
    ... )
    'lake=0:250,100:1000'
    """
    history = history_of_summary(summary)
    parts = history.epochs()
    if not parts or any(a != b for _d, a, b in parts):
        return None
    epochs = history.simulator_epochs(ancestral_size)
    return f"{population}=" + ",".join(f"{g}:{size}" for g, size in epochs)


@functools.lru_cache(maxsize=16)
def _parts(n: int, history: History, beneficial: bool) -> tuple[DfeExpectation, np.ndarray]:
    if not history.epochs():
        return DfeExpectation(n), 1.0 / np.arange(1, n)
    k = HistoryKernel(n, history, beneficial=beneficial)
    return DfeExpectation(n, k), k.neutral()


def history_parts(
    n: int, summary: dict[str, Any], beneficial: bool = False
) -> tuple[DfeExpectation, np.ndarray]:
    """The DFE averages and the neutral spectrum (per θL, current size) of a recorded
    history, for likelihoods built after the fit (e.g. the comparisons); cached per
    process.

    Parameters
    ----------
    n : int
        Gene copies.
    summary : dict
        A fit's ``size_history``.
    beneficial : bool
        Tabulate the beneficial side too (for a model with a beneficial class).

    Returns
    -------
    (DfeExpectation, ndarray of shape (n - 1,))
    """
    return _parts(int(n), history_of_summary(summary), bool(beneficial))


def replicate_history(
    data: SpectrumPair, point: dict[str, Any], eps: float | None, beneficial: bool = False
) -> FittedHistory:
    """The history of a bootstrap replicate, from the point fit's summary.

    The point estimate's model is refitted to the replicate's neutral class (``auto``
    keeps the model chosen on the data: the choice is not resampled); a history read
    from a file, and equilibrium, are kept as they are.

    Parameters
    ----------
    data : SpectrumPair
        The replicate's spectra.
    point : dict
        :meth:`FittedHistory.summary` of the point fit.
    eps : float or None
        Misorientation rate fixed at this value, or None to estimate it.
    beneficial : bool
        Tabulate the beneficial side too.

    Returns
    -------
    FittedHistory
    """
    model = str(point["model"])
    if model == "demes":
        fixed = history_of_summary(point)
        return prepare_history(data, str(point["requested"]), eps, fixed, beneficial)
    if model == "equilibrium":
        best = fit_neutral_history(data, "equilibrium", eps)
        ex, neutral_g = _parts(data.n, ConstantSize(), False)
        return FittedHistory(model, ConstantSize(), best, {}, model, ex, neutral_g)
    return prepare_history(data, model, eps, beneficial=beneficial)
