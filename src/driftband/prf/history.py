r"""Expected site frequency spectra under selection and a changing population size.

Size histories
--------------
Time runs backward from the sample in units of :math:`2N_{anc}` generations, where
:math:`N_{anc}` is the ancestral (oldest) diploid size; sizes are ratios
:math:`\nu = N/N_{anc}`. The population is at mutation--selection--drift equilibrium at
:math:`N_{anc}` before the oldest change.

- :class:`ConstantSize` -- equilibrium (the spectra of :mod:`driftband.prf.expected`).
- :class:`OneChange` ``(nu, tau)`` -- size :math:`\nu N_{anc}` for the last :math:`\tau`.
- :class:`TwoChanges` ``(nu1, tau1, nu2, tau2)`` -- :math:`\nu_1 N_{anc}` from
  :math:`\tau_1 + \tau_2` ago for :math:`\tau_1`, then :math:`\nu_2 N_{anc}` for the last
  :math:`\tau_2` (a bottleneck with recovery, an expansion then decline, ...).
- :class:`ExponentialChange` ``(nu, tau)`` -- from :math:`\tau` ago the size changes
  exponentially from :math:`N_{anc}` to :math:`\nu N_{anc}` at the sample,
  :math:`N(t) = N_{anc}\,\nu^{t/\tau}` with ``t`` the time since the onset.
- :class:`Epochs` -- any sequence of constant or exponential epochs (a demes file,
  :mod:`driftband.demography`).

The same histories in the simulator's terms (:mod:`driftband.simulate`, whose histories are
``(generations_ago, diploid_size)`` epochs with the oldest size as burn-in): ``ancestral
size`` = :math:`N_{anc}`, a change :math:`\tau` ago is at
``round(2 * N_anc * tau)`` generations ago, and an epoch of ratio :math:`\nu` has
``round(nu * N_anc)`` individuals; :meth:`OneChange.simulator_epochs` (and the others)
return that list.

Parameterisation of S and theta
-------------------------------
Fitnesses 1 : 1+s : 1+2s. ``S`` and :math:`\theta` refer to a *reference size* N:
:math:`S = 4Ns`, :math:`\theta = 4N\mu`. By default N is the **current** size (the size
at the sample, :math:`\nu_{now} N_{anc}`); ``reference="ancestral"`` takes
:math:`N_{anc}`. The spectra are :math:`E[\xi_i]/(\theta L)`, ``i = 1..n-1``, as
:func:`driftband.prf.expected_sfs` is at equilibrium. With the ancestral reference, an old
enough change to ratio :math:`\nu` gives :math:`\nu\, g^{eq}(\nu S)`; with the current one
it gives :math:`g^{eq}(S)`.

Method and why
--------------
The forward Wright--Fisher diffusion with selection (Kimura 1964) is solved in the logit
of the frequency, :math:`y = \ln(x/(1-x))`, by the method of lines
(:mod:`driftband.prf._history_solver`): fourth-order finite differences in ``y`` and
implicit Euler extrapolated to sixth order in time (Deuflhard 1985) on a graded mesh,
with each epoch's equilibrium profile (Sawyer & Hartl 1992) subtracted exactly. This is
the finite-difference family of Gutenkunst et al. (2009), with three changes that address
strong selection, the hard part:

1. In the logit, selection is a transport at constant speed :math:`S/2` and the PRF density
   :math:`x(1-x)f(x)` is bounded (it tends to :math:`\theta` at low frequency), so its
   features keep a width of order 1 in ``y`` for every ``S``: a uniform grid serves
   :math:`|S|` from 0 to :math:`10^7` without a boundary layer to resolve in ``x``.
2. Subtracting the epoch's equilibrium makes the constant history exact and leaves a
   departure that vanishes at both ends (no mutation-input source to discretise).
3. The huge drift coefficient near the ends (:math:`e^{|y|}/2`) is stiff; the extrapolated
   implicit Euler is L-stable there and needs no step restriction from it.

A spectral (Gegenbauer) representation (Song & Steinrücken 2012; Živković et al. 2015)
would give exact time evolution, but with selection it is similar to a symmetric problem
only through factors :math:`e^{\pm S x/2}`, whose dynamic range (:math:`e^{5000}` at
:math:`|S| = 10^4`) defeats double precision; moment closures (Jouganous et al. 2017) are
approximate under selection; the discrete Wright--Fisher chain (Keightley & Eyre-Walker
2007) carries an :math:`O(1/N)` difference from the diffusion. All ``S`` of a table are
solved together as one block-banded system.

Accuracy and speed (``benchmarks/bench_history.py``, worst relative error on entries
holding at least 1e-6 of the total, against the same solver at half the grid step, about a
third of the time steps and one more extrapolation level; n = 40 and 200):

- neutral and weak selection (:math:`|S| \lesssim 1`), and strong selection once the
  transient has passed (:math:`|S| = 10^4` at the histories measured): 2e-7 to 6e-6;
  against the closed form (Tavaré 1984) the neutral error is at most 1e-5 in the tests;
- intermediate selection (:math:`1 < |S| < 10^3`) right after a change: **1e-5 to 1e-2,
  short of the 1e-6 target**. The departure from equilibrium then has steep exponential
  tails in ``y`` (log-slope up to about ``i`` at class ``i``) that fourth-order differences
  on a step of 0.1 do not resolve to 1e-6; the worst entries are the rare high classes;
- speed: about 0.26 s per S value at n = 40 for a one-change history (a 256-node table
  about 70 s), far from the 0.3 s per table that the fit needs: not yet usable inside a
  fit. The cost is the time stepping (about 250 macro steps of 21 banded solves).

No I/O happens here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from ..exceptions import OptionError
from . import _history_solver as _hs
from .expected import _check_n, _log_binom, kernel

__all__ = [
    "MAX_TOTAL_DURATION",
    "ConstantSize",
    "Epochs",
    "ExponentialChange",
    "History",
    "HistorySfs",
    "NU_RANGE",
    "OneChange",
    "TAU_RANGE",
    "TwoChanges",
    "history_sfs",
]

#: Allowed size ratios nu = N / N_anc (the range of the accuracy targets).
NU_RANGE = (0.01, 100.0)
#: Allowed durations tau, in units of 2 N_anc generations.
TAU_RANGE = (0.001, 5.0)


def _check(name: str, value: float, lo: float, hi: float, what: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise OptionError(
            f"size history: `{name}` ({what}) must be a number, got {value!r}"
        ) from None
    if not math.isfinite(v) or v <= 0:
        raise OptionError(
            f"size history: `{name}` ({what}) must be a positive number, got {value!r}"
        )
    if not lo <= v <= hi:
        raise OptionError(f"size history: `{name}` ({what}) must be in [{lo:g}, {hi:g}], got {v:g}")
    return v


def _nu(name: str, value: float) -> float:
    return _check(name, value, *NU_RANGE, "size ratio N/N_anc")


def _tau(name: str, value: float) -> float:
    return _check(name, value, *TAU_RANGE, "duration in units of 2 N_anc generations")


def _sim_epochs(
    changes: list[tuple[float, float]], ancestral_size: int
) -> tuple[tuple[int, int], ...]:
    """``(generations_ago, size)`` epochs from ``(tau_ago, nu)`` pairs, oldest last."""
    n_anc = int(ancestral_size)
    if n_anc < 1:
        raise OptionError(
            f"`ancestral_size` must be a positive whole number, got {ancestral_size!r}"
        )
    out: list[tuple[int, int]] = []
    for ago, nu in changes:
        g = int(round(2 * n_anc * ago))
        size = max(1, int(round(nu * n_anc)))
        if out and out[-1][0] == g:
            continue
        if out and out[-1][1] == size:
            continue
        out.append((g, size))
    return tuple(out)


@dataclass(frozen=True)
class ConstantSize:
    """Constant size: the equilibrium spectra of :mod:`driftband.prf.expected`."""

    @property
    def nu_now(self) -> float:
        """Current size over ancestral size."""
        return 1.0

    def epochs(self) -> list[tuple[float, float, float]]:
        """``(duration, nu_start, nu_end)`` after the ancestral equilibrium, oldest first."""
        return []

    def simulator_epochs(self, ancestral_size: int) -> tuple[tuple[int, int], ...]:
        """The history as the simulator's ``(generations_ago, diploid_size)`` epochs."""
        return _sim_epochs([(0.0, 1.0)], ancestral_size)


@dataclass(frozen=True)
class _RatioAndTime:
    """A history set by one size ratio ``nu`` (current over ancestral) and one time
    ``tau`` (units of 2 N_anc generations), both range-checked."""

    nu: float
    tau: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "nu", _nu("nu", self.nu))
        object.__setattr__(self, "tau", _tau("tau", self.tau))

    @property
    def nu_now(self) -> float:
        """Current size over ancestral size."""
        return self.nu


@dataclass(frozen=True)
class OneChange(_RatioAndTime):
    r"""One instantaneous change to :math:`\nu N_{anc}`, :math:`\tau` before the sample.

    Parameters
    ----------
    nu : float
        Current size over ancestral size, in [0.01, 100].
    tau : float
        Time since the change in units of :math:`2N_{anc}` generations, in [0.001, 5].
    """

    def epochs(self) -> list[tuple[float, float, float]]:
        """``(duration, nu_start, nu_end)`` after the ancestral equilibrium, oldest first."""
        return [(self.tau, self.nu, self.nu)]

    def simulator_epochs(self, ancestral_size: int) -> tuple[tuple[int, int], ...]:
        """The history as the simulator's ``(generations_ago, diploid_size)`` epochs."""
        return _sim_epochs([(0.0, self.nu), (self.tau, 1.0)], ancestral_size)


@dataclass(frozen=True)
class TwoChanges:
    r"""Two changes: :math:`\nu_1 N_{anc}` for :math:`\tau_1`, then :math:`\nu_2 N_{anc}`
    for the last :math:`\tau_2`.

    Parameters
    ----------
    nu1, nu2 : float
        Size ratios of the older and the recent epoch, in [0.01, 100].
    tau1, tau2 : float
        Their durations in units of :math:`2N_{anc}` generations, in [0.001, 5].
    """

    nu1: float
    tau1: float
    nu2: float
    tau2: float

    def __post_init__(self) -> None:
        for name in ("nu1", "nu2"):
            object.__setattr__(self, name, _nu(name, getattr(self, name)))
        for name in ("tau1", "tau2"):
            object.__setattr__(self, name, _tau(name, getattr(self, name)))

    @property
    def nu_now(self) -> float:
        """Current size over ancestral size."""
        return self.nu2

    def epochs(self) -> list[tuple[float, float, float]]:
        """``(duration, nu_start, nu_end)`` after the ancestral equilibrium, oldest first."""
        return [(self.tau1, self.nu1, self.nu1), (self.tau2, self.nu2, self.nu2)]

    def simulator_epochs(self, ancestral_size: int) -> tuple[tuple[int, int], ...]:
        """The history as the simulator's ``(generations_ago, diploid_size)`` epochs."""
        return _sim_epochs(
            [(0.0, self.nu2), (self.tau2, self.nu1), (self.tau1 + self.tau2, 1.0)], ancestral_size
        )


@dataclass(frozen=True)
class ExponentialChange(_RatioAndTime):
    r"""Exponential change from :math:`N_{anc}` at :math:`\tau` ago to :math:`\nu N_{anc}`
    at the sample: :math:`N(t) = N_{anc}\nu^{t/\tau}`, ``t`` the time since the onset.

    Parameters
    ----------
    nu : float
        Current size over ancestral size, in [0.01, 100] (growth if above 1).
    tau : float
        Time since the onset in units of :math:`2N_{anc}` generations, in [0.001, 5].
    """

    def epochs(self) -> list[tuple[float, float, float]]:
        """``(duration, nu_start, nu_end)`` after the ancestral equilibrium, oldest first."""
        return [(self.tau, 1.0, self.nu)]

    def simulator_epochs(self, ancestral_size: int) -> tuple[tuple[int, int], ...]:
        """The history as the simulator's epochs: one per generation while it changes."""
        n_anc = int(ancestral_size)
        gens = max(1, int(round(2 * n_anc * self.tau)))
        changes = [(g / (2.0 * n_anc), self.nu ** (1.0 - g / gens)) for g in range(gens)]
        return _sim_epochs(changes + [(gens / (2.0 * n_anc), 1.0)], n_anc)


#: Longest total duration of an :class:`Epochs` history, in units of 2 N_anc generations
#: (older changes have left no trace in the spectra: their epoch is the ancestral one).
MAX_TOTAL_DURATION = 50.0


@dataclass(frozen=True)
class Epochs:
    r"""A history given epoch by epoch (e.g. read from a demes file).

    Parameters
    ----------
    parts : tuple of (float, float, float)
        ``(duration, nu_start, nu_end)`` after the ancestral equilibrium, oldest first:
        durations in units of :math:`2N_{anc}` generations (positive, at most
        :data:`MAX_TOTAL_DURATION` in all), size ratios in [0.01, 100]; an epoch with
        ``nu_start != nu_end`` changes exponentially between them.

    Examples
    --------
    >>> h = Epochs(((0.5, 0.2, 0.2), (0.1, 0.2, 2.0)))
    >>> h.nu_now
    2.0
    """

    parts: tuple[tuple[float, float, float], ...]

    def __post_init__(self) -> None:
        out = []
        for k, ep in enumerate(self.parts):
            try:
                d, a, b = (float(v) for v in ep)
            except (TypeError, ValueError):
                raise OptionError(
                    f"size history: epoch {k + 1} must be (duration, nu_start, nu_end), got {ep!r}"
                ) from None
            if not (math.isfinite(d) and d > 0):
                raise OptionError(
                    f"size history: epoch {k + 1} must last a positive time, got {d!r}"
                )
            out.append((d, _nu(f"epoch {k + 1} nu_start", a), _nu(f"epoch {k + 1} nu_end", b)))
        total = sum(d for d, _a, _b in out)
        if total > MAX_TOTAL_DURATION:
            raise OptionError(
                f"size history: the epochs last {total:g} (units of 2 N_anc generations), "
                f"more than {MAX_TOTAL_DURATION:g}; start the history at its last "
                f"{MAX_TOTAL_DURATION:g} units (older changes leave no trace in the spectra)"
            )
        object.__setattr__(self, "parts", tuple(out))

    @property
    def nu_now(self) -> float:
        """Current size over ancestral size."""
        return self.parts[-1][2] if self.parts else 1.0

    def epochs(self) -> list[tuple[float, float, float]]:
        """``(duration, nu_start, nu_end)`` after the ancestral equilibrium, oldest first."""
        return list(self.parts)

    def simulator_epochs(self, ancestral_size: int) -> tuple[tuple[int, int], ...]:
        """The history as the simulator's ``(generations_ago, diploid_size)`` epochs
        (exponential epochs one generation at a time)."""
        n_anc = int(ancestral_size)
        changes: list[tuple[float, float]] = []
        end = 0.0  # time before the sample at which the current epoch ends
        for d, a, b in reversed(self.parts):
            gens = max(1, int(round(2 * n_anc * d)))
            if a == b:
                changes.append((end, b))
            else:
                for g in range(gens):
                    changes.append((end + g / (2.0 * n_anc), b * (a / b) ** (g / gens)))
            end += gens / (2.0 * n_anc)
        return _sim_epochs(changes + [(end, 1.0)], n_anc)


History = ConstantSize | OneChange | TwoChanges | ExponentialChange | Epochs

_HISTORY_TYPES = (ConstantSize, OneChange, TwoChanges, ExponentialChange, Epochs)


@dataclass(frozen=True)
class _Resolution:
    """Numerical settings of the solver."""

    h: float = 0.1
    rho: float = 0.25
    cap_adv: float = 0.5
    levels: int = 6
    y_lo: float = -30.0
    y_hi: float = 26.0


#: Default settings and the high-resolution reference the accuracy is measured against.
DEFAULT_RESOLUTION = _Resolution()
REFERENCE_RESOLUTION = _Resolution(h=0.05, rho=0.08, cap_adv=0.15, levels=7)


class HistorySfs:
    r"""Expected unfolded spectra :math:`g_i(S)` for one sample size and one size history.

    Parameters
    ----------
    n : int
        Number of sampled gene copies, ``n >= 2``.
    history : ConstantSize, OneChange, TwoChanges or ExponentialChange
    reference : {"current", "ancestral"}
        The size ``N`` in :math:`S = 4Ns` and :math:`\theta = 4N\mu` (default: the size
        at the sample).
    resolution : _Resolution, optional
        Solver settings (:data:`DEFAULT_RESOLUTION`; :data:`REFERENCE_RESOLUTION` is the
        slow reference of the accuracy figures).
    mesh_S : float
        Build every batch's time mesh for at least this ``|S|`` (on the reference size),
        so that the discretisation error varies smoothly with ``S`` across batches
        (default 0: each batch's own largest ``|S|``).

    Notes
    -----
    The spectrum is

    .. math::

        g_i = \nu_{now}\, g^{eq}_i(\nu_{now} S_{anc})
              + \binom{n}{i}\int x^i (1-x)^{n-i}\, d(y, \tau_{tot})\, dy,

    in units of :math:`\theta_{anc} L` (then divided by :math:`\nu_{now}` for the current
    reference), with :math:`g^{eq}` from :class:`~driftband.prf.SfsKernel` and ``d`` the
    solver's departure from the current equilibrium. The integral is a trapezoid rule on a
    grid of step ``min(0.6/sqrt(n), 0.2)``, onto which ``d`` is interpolated from the
    solver's grid (8-point Lagrange).

    Examples
    --------
    >>> k = HistorySfs(10, ConstantSize())
    >>> bool(np.allclose(k.g(-3.0), kernel(10).g(-3.0), rtol=1e-12))
    True
    """

    def __init__(
        self,
        n: int,
        history: History,
        reference: Literal["current", "ancestral"] = "current",
        resolution: _Resolution | None = None,
        mesh_S: float = 0.0,
    ) -> None:
        self.n = _check_n(n)
        if not isinstance(history, _HISTORY_TYPES):
            raise TypeError(
                f"`history` must be one of {[t.__name__ for t in _HISTORY_TYPES]}"
                f", got {type(history).__name__}"
            )
        if reference not in ("current", "ancestral"):
            raise OptionError(
                f"`reference` (size that S and theta refer to) must be "
                f"'current' or 'ancestral', got {reference!r}"
            )
        self.history = history
        self.reference = reference
        self.res = DEFAULT_RESOLUTION if resolution is None else resolution
        nu_ref = history.nu_now if reference == "current" else 1.0
        # transport speed S_anc / 2 that every batch's time mesh is built for
        self.b_mesh = abs(float(mesh_S)) / nu_ref / 2.0
        self._grid: _hs.Grid | None = None
        self._W: np.ndarray | None = None

    # -- set-up -----------------------------------------------------------------------
    def _setup(self) -> tuple[_hs.Grid, np.ndarray]:
        if self._grid is None or self._W is None:
            r = self.res
            grid = _hs.Grid(r.h, r.y_lo, r.y_hi)
            n = self.n
            h_int = min(0.6 / math.sqrt(n), 0.2)
            ratio = max(1, int(math.ceil(r.h / h_int)))
            hf = r.h / ratio
            yf = grid.y[0] + hf * np.arange((grid.mi - 1) * ratio + 1)
            log_x = -np.logaddexp(0.0, -yf)
            log_1mx = -np.logaddexp(0.0, yf)
            i = np.arange(1, n, dtype=float)
            Kf = (
                np.exp(
                    _log_binom(n)[:, None]
                    + i[:, None] * log_x[None, :]
                    + (n - i)[:, None] * log_1mx[None, :]
                )
                * hf
            )
            if ratio == 1:
                W = Kf
            else:
                W = Kf @ _hs.lagrange_matrix(grid.y, yf)
            self._grid, self._W = grid, W
        return self._grid, self._W

    # -- core -------------------------------------------------------------------------
    def _g_anc(self, S_anc: np.ndarray) -> np.ndarray:
        """Spectra per unit theta_anc L for ancestral-size S (1-D), shape (B, n - 1)."""
        epochs = self.history.epochs()
        nu_now = self.history.nu_now
        eq_now = nu_now * kernel(self.n).g(nu_now * S_anc)
        if not epochs:
            return eq_now
        grid, W = self._setup()
        r = self.res
        col = S_anc[:, None]

        def g_eq(nu: float) -> np.ndarray:
            return nu * _hs.w_eq(nu * col, grid.x, grid.omx)

        b = S_anc / 2.0
        nu_prev = 1.0
        d = np.zeros((S_anc.size, grid.mi))
        for T, nu0, nu1 in epochs:
            d = d + g_eq(nu_prev) - g_eq(nu0)
            if nu0 == nu1:

                def const_a(t: float, a: float = 1.0 / nu0) -> float:
                    return a

                d, _ = _hs.evolve(
                    grid,
                    d,
                    T,
                    const_a,
                    b,
                    levels=r.levels,
                    rho=r.rho,
                    cap_adv=r.cap_adv,
                    b_mesh=self.b_mesh,
                )
            else:
                rate = math.log(nu1 / nu0) / T

                def a_of_t(t: float, nu0: float = nu0, rate: float = rate) -> float:
                    return 1.0 / (nu0 * math.exp(rate * t))

                def src(
                    t: float, nu0: float = nu0, rate: float = rate, eps: float = 1e-4
                ) -> np.ndarray:
                    # d/dt of nu w_{nu S}: central difference in ln nu (error ~ eps^2)
                    nu_t = nu0 * math.exp(rate * t)
                    return (
                        rate
                        * (g_eq(nu_t * math.exp(eps)) - g_eq(nu_t * math.exp(-eps)))
                        / (2 * eps)
                    )

                cap = T / max(4.0, 8.0 * abs(math.log(nu1 / nu0)))
                d, _ = _hs.evolve(
                    grid,
                    d,
                    T,
                    a_of_t,
                    b,
                    src_of_t=src,
                    levels=r.levels,
                    rho=r.rho,
                    cap_adv=r.cap_adv,
                    cap_nu=cap,
                    a_max=1.0 / min(nu0, nu1),
                    b_mesh=self.b_mesh,
                )
            nu_prev = nu1
        return eq_now + d @ W.T

    def g(self, S: ArrayLike, chunk: int = 128) -> np.ndarray:
        r"""Expected count per unit :math:`\theta L` in each class.

        Parameters
        ----------
        S : array_like, float
            Scaled selection coefficients :math:`4Ns` on the reference size (negative =
            deleterious), any shape; finite.
        chunk : int
            Number of ``S`` values solved together (bounds memory: about
            ``chunk * 560 * 7 * 8`` bytes per band matrix).

        Returns
        -------
        ndarray, shape ``S.shape + (n - 1,)``, float64
            Entry ``[..., i-1]`` is :math:`g_i(S)`, ``i = 1..n-1``.
        """
        S = np.asarray(S, dtype=float)
        flat = S.reshape(-1)
        if not np.all(np.isfinite(flat)):
            raise ValueError("`S` (scaled selection coefficients) must be finite")
        nu_ref = self.history.nu_now if self.reference == "current" else 1.0
        S_anc = flat / nu_ref
        out = np.empty((flat.size, self.n - 1))
        # similar |S| together: the time mesh of a batch is set by its largest |S|
        order = np.argsort(np.abs(S_anc), kind="stable")
        for lo in range(0, flat.size, chunk):
            idx = order[lo : lo + chunk]
            out[idx] = self._g_anc(S_anc[idx]) / nu_ref
        return out.reshape(S.shape + (self.n - 1,))

    def table(self, S_grid: ArrayLike) -> np.ndarray:
        """Spectra over a 1-D grid of ``S``, shape ``(len(S_grid), n - 1)`` (see :meth:`g`)."""
        grid = np.asarray(S_grid, dtype=float)
        if grid.ndim != 1:
            raise ValueError(f"`S_grid` must be 1-D, got shape {grid.shape}")
        return self.g(grid)

    def __repr__(self) -> str:
        return f"HistorySfs(n={self.n}, history={self.history!r}, reference={self.reference!r})"


def history_sfs(
    n: int, S: ArrayLike, history: History, reference: Literal["current", "ancestral"] = "current"
) -> np.ndarray:
    r"""Expected unfolded spectrum under a size history, per unit :math:`\theta L`.

    Parameters
    ----------
    n : int
        Number of sampled gene copies.
    S : array_like, float
        :math:`4Ns` on the reference size, any shape.
    history : ConstantSize, OneChange, TwoChanges or ExponentialChange
    reference : {"current", "ancestral"}

    Returns
    -------
    ndarray, shape ``S.shape + (n - 1,)``, float64

    Examples
    --------
    >>> e = history_sfs(4, 0.0, OneChange(nu=1.0, tau=0.5))
    >>> bool(np.allclose(e, [1.0, 0.5, 1 / 3], rtol=1e-8))
    True
    """
    return HistorySfs(n, history, reference).g(S)
