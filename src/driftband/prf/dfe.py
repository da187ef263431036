r"""Distributions of fitness effects (DFEs) on the scaled axis S = 4 Ne s, and their use.

Deleterious effects are negative, ``S = -t`` with ``t > 0``. Each family describes ``t``
for the deleterious part; :class:`WithBeneficial` mixes in a point mass of beneficial
mutations at ``S = +s_b``.

- :class:`GammaDfe` -- ``t ~ Gamma(shape, mean)`` (the default family).
- :class:`LognormalDfe` -- ``ln t ~ Normal(mu, sigma)``.
- :class:`DiscreteDfe` -- free masses in |Ne s| bands (|S| = 4 |Ne s|): within a finite
  band ``[a, b)`` the density is uniform in ``t`` on ``[4a, 4b)``; the open last band
  ``[last, inf)`` is log-uniform in ``t`` on ``[4 last, 4000 last]`` (three decades).
- :class:`WithBeneficial` -- any of these, plus a fraction ``p_b`` of new mutations with
  ``S = +s_b``.

Functions: :func:`band_shares`, :func:`deleterious_band_shares`,
:func:`mean_fixation_ratio`, :func:`sample_S`; and :class:`DfeExpectation`, which averages
the expected spectrum over a DFE in tens of microseconds from a table built once per
sample size (fixed Gauss--Legendre panels in ln t, 16 nodes per decade).

No I/O happens here.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, TypeVar, cast

import numpy as np
from numpy.typing import ArrayLike
from scipy.optimize import brentq
from scipy.special import digamma, gammainc, gammaincc, gammaln, ndtr, polygamma, zeta

from ..defaults import DEFAULT_EDGES_NES
from .expected import SfsKernel, _log_binom, fixation_ratio, kernel

__all__ = [
    "DfeExpectation",
    "DiscreteDfe",
    "GammaDfe",
    "LognormalDfe",
    "WithBeneficial",
    "band_shares",
    "deleterious_band_shares",
    "mean_fixation_ratio",
    "sample_S",
]

#: Width, in decades of t, of the open last band of :class:`DiscreteDfe`.
OPEN_BAND_DECADES = 3.0

#: Quadrature range in t = -S: below T_LO the mass is handled analytically
#: (g_i(-t) = 1/i - t/(2(n+1)) + O(t^2)); between T_MID and T_HI the spectrum is the
#: terminating large-|S| expansion (exact up to O(e^-t)); mass above T_HI contributes 0.
T_LO, T_MID, T_HI = 1e-8, 1e8, 1e12
#: Gauss--Legendre nodes per panel (one panel per decade of t).
NODES_PER_DECADE = 16
#: A DFE whose ln t has a standard deviation below this gets extra panels over its bulk.
NARROW_SD = 0.5
#: Narrow DFEs: the decades holding the bulk (mean +- 14 sd of ln t) are split into
#: this many panels each (the first level with panel width <= 4.6 sd, the ratio that the
#: standard one-panel-per-decade table has at sd = 0.5); narrower still: a table per call.
FINE_LEVELS = (4, 16, 64)
#: Gamma shape above which sd(ln t) = sqrt(trigamma(shape)) < NARROW_SD.
_GAMMA_NARROW_SHAPE = float(brentq(lambda b: polygamma(1, b) - NARROW_SD ** 2, 0.5, 100.0))


def _check_pos(name: str, value: float) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise ValueError(f"`{name}` must be a positive finite number, got {value!r}")
    return v


def _check_edges(edges_nes: Iterable[float]) -> tuple[float, ...]:
    e = tuple(float(v) for v in edges_nes)
    if len(e) < 2 or e[0] != 0.0:
        raise ValueError(f"band edges on |Ne s| must start at 0 and have at least two "
                         f"values, e.g. 0,1,10,100; got {edges_nes!r}")
    if not all(math.isfinite(v) for v in e) or any(b <= a for a, b in zip(e, e[1:])):
        raise ValueError(f"band edges on |Ne s| must be finite and strictly increasing, "
                         f"got {edges_nes!r}")
    return e


# ----------------------------------------------------------------------- DFE families
_D = TypeVar("_D", bound="_Deleterious")


class _Deleterious:
    """Shared behaviour of the deleterious families (distribution of t = -S > 0).

    The families are frozen dataclasses deriving from this class.
    """

    family = ""

    if TYPE_CHECKING:  # defined by every family
        def cdf_t(self, t: ArrayLike) -> np.ndarray: ...

        def partial_mean_t(self, c: float) -> float: ...

    @property
    def param_names(self) -> tuple[str, ...]:
        """Names of the natural parameters, in order (tuple of str)."""
        return tuple(f.name for f in dataclasses.fields(cast(Any, self)))

    @property
    def params(self) -> dict[str, float]:
        """Natural parameters by name (dict of str to float)."""
        return {k: getattr(self, k) for k in self.param_names}

    def with_params(self: _D, **kw: float) -> _D:
        """Copy with some natural parameters replaced (validated)."""
        return cast(_D, dataclasses.replace(cast(Any, self), **kw))

    # Defaults overridden by the families.
    @property
    def breakpoints_t(self) -> tuple[float, ...]:
        """Values of t where the density has a kink or an edge (none by default)."""
        return ()

    def bulk_log_t(self) -> tuple[float, float] | None:
        """(mean, sd) of ln t, used to refine quadrature for narrow DFEs, or None."""
        return None

    def is_narrow(self) -> bool:
        """Whether sd(ln t) < NARROW_SD (needs refined panels)."""
        return False

    def _small_t(self, c: float) -> tuple[float, float]:
        """(P(T < c), E[T; T < c])."""
        return float(self.cdf_t(c)), self.partial_mean_t(c)


@dataclass(frozen=True)
class GammaDfe(_Deleterious):
    r"""Gamma DFE on ``t = -S``: shape :math:`\beta`, mean :math:`\bar S`.

    Density :math:`f(t) = \lambda^\beta t^{\beta-1} e^{-\lambda t}/\Gamma(\beta)` with rate
    :math:`\lambda = \beta/\bar S`.

    Parameters
    ----------
    shape : float
        Shape :math:`\beta > 0` (small values: a wide spread over orders of magnitude).
    mean : float
        Mean :math:`\bar S > 0` of :math:`t = -S = 4 N_e |s|`.
    """

    shape: float
    mean: float
    family = "gamma"

    def __post_init__(self) -> None:
        object.__setattr__(self, "shape", _check_pos("shape", self.shape))
        object.__setattr__(self, "mean", _check_pos("mean", self.mean))

    @property
    def rate(self) -> float:
        """Rate :math:`\\lambda = \\beta / \\bar S` (float)."""
        return self.shape / self.mean

    def cdf_t(self, t: ArrayLike) -> np.ndarray:
        """P(T <= t), array like ``t``."""
        return gammainc(self.shape, self.rate * np.asarray(t, dtype=float))

    def sf_t(self, t: ArrayLike) -> np.ndarray:
        """P(T > t), array like ``t`` (no cancellation where it is small)."""
        return gammaincc(self.shape, self.rate * np.asarray(t, dtype=float))

    def logpdf_t(self, t: ArrayLike, log_t: np.ndarray | None = None) -> np.ndarray:
        """Log density of t, array like ``t`` (``log_t``: precomputed ``ln t``)."""
        t = np.asarray(t, dtype=float)
        b, lam = self.shape, self.rate
        lt = np.log(t) if log_t is None else log_t
        return (b * math.log(lam) - math.lgamma(b)) + (b - 1.0) * lt - lam * t

    def partial_mean_t(self, c: float) -> float:
        """E[T; T < c] (float)."""
        return float(self.mean * gammainc(self.shape + 1.0, self.rate * c))

    def _small_t(self, c: float) -> tuple[float, float]:
        """(P(T < c), E[T; T < c]) in one call."""
        P = gammainc(np.array([self.shape, self.shape + 1.0]), self.rate * c)
        return float(P[0]), float(self.mean * P[1])

    def is_narrow(self) -> bool:
        """Whether sd(ln t) < NARROW_SD (needs refined panels)."""
        return self.shape > _GAMMA_NARROW_SHAPE

    def bulk_log_t(self) -> tuple[float, float]:
        return (float(digamma(self.shape) - math.log(self.rate)),
                float(math.sqrt(polygamma(1, self.shape))))

    def sample_t(self, size: int | tuple[int, ...], rng: np.random.Generator) -> np.ndarray:
        """Random draws of t (ndarray of shape ``size``)."""
        return rng.gamma(self.shape, self.mean / self.shape, size)


@dataclass(frozen=True)
class LognormalDfe(_Deleterious):
    r"""Lognormal DFE on ``t = -S``: :math:`\ln t \sim \mathrm{Normal}(\mu, \sigma)`.

    Parameters
    ----------
    mu : float
        Mean of :math:`\ln t` (so the median of t is :math:`e^\mu`).
    sigma : float
        Standard deviation of :math:`\ln t`, > 0.
    """

    mu: float
    sigma: float
    family = "lognormal"

    def __post_init__(self) -> None:
        if not math.isfinite(float(self.mu)):
            raise ValueError(f"`mu` must be finite, got {self.mu!r}")
        object.__setattr__(self, "mu", float(self.mu))
        object.__setattr__(self, "sigma", _check_pos("sigma", self.sigma))

    def _z(self, t: ArrayLike) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return (np.log(np.asarray(t, dtype=float)) - self.mu) / self.sigma

    def cdf_t(self, t: ArrayLike) -> np.ndarray:
        """P(T <= t), array like ``t``."""
        return ndtr(self._z(t))

    def sf_t(self, t: ArrayLike) -> np.ndarray:
        """P(T > t), array like ``t``."""
        return ndtr(-self._z(t))

    def logpdf_t(self, t: ArrayLike, log_t: np.ndarray | None = None) -> np.ndarray:
        """Log density of t, array like ``t`` (``log_t``: precomputed ``ln t``)."""
        lt = np.log(np.asarray(t, dtype=float)) if log_t is None else log_t
        z = (lt - self.mu) / self.sigma
        return -lt - (math.log(self.sigma) + 0.5 * math.log(2 * math.pi)) - 0.5 * z * z

    def is_narrow(self) -> bool:
        """Whether sd(ln t) < NARROW_SD (needs refined panels)."""
        return self.sigma < NARROW_SD

    def partial_mean_t(self, c: float) -> float:
        """E[T; T < c] (float)."""
        s = self.sigma
        return float(math.exp(self.mu + 0.5 * s * s) * ndtr((math.log(c) - self.mu) / s - s))

    def bulk_log_t(self) -> tuple[float, float]:
        return (self.mu, self.sigma)

    def sample_t(self, size: int | tuple[int, ...], rng: np.random.Generator) -> np.ndarray:
        """Random draws of t (ndarray of shape ``size``)."""
        return np.exp(rng.normal(self.mu, self.sigma, size))


@dataclass(frozen=True)
class DiscreteDfe(_Deleterious):
    r"""Discrete DFE: free masses of new deleterious mutations in |Ne s| bands.

    Band ``k`` is :math:`e_k \le |N_e s| < e_{k+1}` (the last one open). Within a finite
    band the density is uniform in :math:`t = -S = 4|N_e s|` on :math:`[4e_k, 4e_{k+1})`;
    the open last band is log-uniform in t on :math:`[4e_K, 4000\,e_K]` (three decades
    beyond its lower edge; an assumption of this family, needed to give it a spectrum).

    Parameters
    ----------
    masses : tuple of float
        One mass per band, each >= 0, summing to 1 (to 1e-8).
    edges_nes : tuple of float, default (0, 1, 10, 100)
        Lower band edges on |Ne s|, starting at 0 and strictly increasing.
    """

    masses: tuple[float, ...]
    edges_nes: tuple[float, ...] = DEFAULT_EDGES_NES
    family = "discrete"

    def __post_init__(self) -> None:
        e = _check_edges(self.edges_nes)
        m = tuple(float(v) for v in self.masses)
        if len(m) != len(e):
            raise ValueError(f"`masses` needs one value per band ({len(e)} bands for edges "
                             f"{e}), got {len(m)}")
        if not all(math.isfinite(v) and v >= 0 for v in m):
            raise ValueError(f"`masses` must be non-negative and finite, got {m}")
        if abs(math.fsum(m) - 1.0) > 1e-8:
            raise ValueError(f"`masses` must sum to 1, got sum {math.fsum(m)!r}")
        object.__setattr__(self, "masses", m)
        object.__setattr__(self, "edges_nes", e)

    @property
    def param_names(self) -> tuple[str, ...]:
        return tuple(f"mass_{k}" for k in range(len(self.masses)))

    @property
    def params(self) -> dict[str, float]:
        return dict(zip(self.param_names, self.masses))

    def with_params(self, **kw: float) -> DiscreteDfe:
        m = list(self.masses)
        for k, v in kw.items():
            if k not in self.param_names:
                raise ValueError(f"unknown parameter {k!r}; expected one of {self.param_names}")
            m[int(k.split("_")[1])] = v
        return DiscreteDfe(tuple(m), self.edges_nes)

    @property
    def bands_t(self) -> list[tuple[float, float, bool]]:
        """Bands on t as (low, high, log_uniform) triples."""
        e = [4.0 * v for v in self.edges_nes]
        out = [(a, b, False) for a, b in zip(e[:-1], e[1:])]
        out.append((e[-1], e[-1] * 10.0 ** OPEN_BAND_DECADES, True))
        return out

    @property
    def breakpoints_t(self) -> tuple[float, ...]:
        return tuple(v for a, b, _ in self.bands_t for v in (a, b) if v > 0)

    @staticmethod
    def _frac(t: ArrayLike, a: float, b: float, log: bool) -> np.ndarray:
        """Within-band cdf at t (exactly 0 below and 1 at/above the band)."""
        t = np.asarray(t, dtype=float)
        if log:
            with np.errstate(divide="ignore"):
                f = (np.log(np.clip(t, a, b)) - math.log(a)) / math.log(b / a)
        else:
            f = (np.clip(t, a, b) - a) / (b - a)
        return np.where(t >= b, 1.0, np.where(t <= a, 0.0, f))

    def cdf_t(self, t: ArrayLike) -> np.ndarray:
        """P(T <= t), array like ``t``."""
        return cast(np.ndarray, sum(m * self._frac(t, a, b, lg)
                                    for m, (a, b, lg) in zip(self.masses, self.bands_t)))

    def sf_t(self, t: ArrayLike) -> np.ndarray:
        """P(T > t), array like ``t``."""
        return cast(np.ndarray, sum(m * (1.0 - self._frac(t, a, b, lg))
                                    for m, (a, b, lg) in zip(self.masses, self.bands_t)))

    def logpdf_t(self, t: ArrayLike, log_t: np.ndarray | None = None) -> np.ndarray:
        """Log density of t (``-inf`` outside the support), array like ``t``."""
        t = np.asarray(t, dtype=float)
        dens = np.zeros_like(t)
        for m, (a, b, lg) in zip(self.masses, self.bands_t):
            inside = (t >= a) & (t < b)
            dens = dens + np.where(inside, m / (t * math.log(b / a)) if lg else m / (b - a),
                                   0.0)
        with np.errstate(divide="ignore"):
            return np.log(dens)

    def partial_mean_t(self, c: float) -> float:
        """E[T; T < c] (float)."""
        tot = 0.0
        for m, (a, b, lg) in zip(self.masses, self.bands_t):
            u = min(max(c, a), b)
            tot += m * ((u - a) / math.log(b / a) if lg else (u * u - a * a) / (2 * (b - a)))
        return tot

    def sample_t(self, size: int | tuple[int, ...], rng: np.random.Generator) -> np.ndarray:
        """Random draws of t (ndarray of shape ``size``)."""
        bands = self.bands_t
        k = rng.choice(len(bands), size=size, p=np.asarray(self.masses) / sum(self.masses))
        u = rng.random(size)
        lo = np.array([a for a, _, _ in bands])[k]
        hi = np.array([b for _, b, _ in bands])[k]
        lg = np.array([g for _, _, g in bands])[k]
        with np.errstate(divide="ignore"):
            return np.where(lg, lo * (hi / np.where(lg, lo, 1.0)) ** u, lo + (hi - lo) * u)


BaseDfe = GammaDfe | LognormalDfe | DiscreteDfe


@dataclass(frozen=True)
class WithBeneficial:
    r"""A deleterious DFE plus a point mass of beneficial mutations.

    A fraction ``p_b`` of new selected-class mutations has :math:`S = +s_b`; the rest
    follows ``base``.

    Parameters
    ----------
    base : GammaDfe, LognormalDfe or DiscreteDfe
        Deleterious part.
    p_b : float
        Fraction of beneficial new mutations, in [0, 1).
    s_b : float
        Their scaled coefficient :math:`S_b = 4 N_e s_b > 0`.
    """

    base: BaseDfe
    p_b: float
    s_b: float
    family_suffix = "+beneficial"

    def __post_init__(self) -> None:
        if isinstance(self.base, WithBeneficial) or not isinstance(self.base, _Deleterious):
            raise ValueError("`base` must be a GammaDfe, LognormalDfe or DiscreteDfe")
        p = float(self.p_b)
        if not (math.isfinite(p) and 0.0 <= p < 1.0):
            raise ValueError(f"`p_b` (beneficial fraction) must be in [0, 1), got {self.p_b!r}")
        object.__setattr__(self, "p_b", p)
        object.__setattr__(self, "s_b", _check_pos("s_b", self.s_b))

    @property
    def family(self) -> str:
        """Family name, e.g. ``'gamma+beneficial'`` (str)."""
        return self.base.family + self.family_suffix

    @property
    def param_names(self) -> tuple[str, ...]:
        """Names of the natural parameters: the base's, then ``p_b``, ``s_b``."""
        return self.base.param_names + ("p_b", "s_b")

    @property
    def params(self) -> dict[str, float]:
        """Natural parameters by name (dict of str to float)."""
        return {**self.base.params, "p_b": self.p_b, "s_b": self.s_b}

    def with_params(self, **kw: float) -> WithBeneficial:
        """Copy with some natural parameters replaced (validated)."""
        own = {k: kw.pop(k) for k in ("p_b", "s_b") if k in kw}
        base = self.base.with_params(**kw) if kw else self.base
        return WithBeneficial(base, own.get("p_b", self.p_b), own.get("s_b", self.s_b))


Dfe = GammaDfe | LognormalDfe | DiscreteDfe | WithBeneficial


def _split(dfe: Dfe) -> tuple[BaseDfe, float, float]:
    """(deleterious base, p_b, s_b)."""
    if isinstance(dfe, WithBeneficial):
        return dfe.base, dfe.p_b, dfe.s_b
    if isinstance(dfe, _Deleterious):
        return dfe, 0.0, 0.0
    raise TypeError(f"expected a DFE object, got {type(dfe).__name__}")


# ------------------------------------------------------------------------ band shares
def deleterious_band_shares(dfe: Dfe,
                            edges_nes: Iterable[float] = DEFAULT_EDGES_NES) -> np.ndarray:
    r"""Shares of the deleterious part of a DFE in |Ne s| bands (sum to 1).

    Share ``k`` is :math:`\Pr(e_k \le t/4 < e_{k+1})`, the last band open. Computed from
    the exact CDF; where the CDF exceeds 1/2 the share is a difference of survival
    functions instead, so small shares in the upper tail keep their relative accuracy.

    Parameters
    ----------
    dfe : DFE object
        For :class:`WithBeneficial`, its ``base`` is used.
    edges_nes : sequence of float, default (0, 1, 10, 100)
        Lower band edges on |Ne s|, starting at 0, strictly increasing.

    Returns
    -------
    ndarray, shape (len(edges_nes),), float64
    """
    base, _, _ = _split(dfe)
    e = _check_edges(edges_nes)
    if isinstance(base, DiscreteDfe):
        # overlap of each requested band with each of the DFE's own bands (exact masses
        # when the bands coincide)
        t_edges = [4.0 * v for v in e] + [math.inf]
        out = np.zeros(len(e))
        for m, (a, b, lg) in zip(base.masses, base.bands_t):
            for k in range(len(e)):
                lo, hi = t_edges[k], t_edges[k + 1]
                fr = float(base._frac(hi, a, b, lg) - base._frac(lo, a, b, lg))
                out[k] += m * fr
        return out
    t = np.array([4.0 * v for v in e] + [math.inf])
    F = np.asarray(base.cdf_t(t), dtype=float)
    Q = np.asarray(base.sf_t(t), dtype=float)
    use_q = F[:-1] > 0.5
    return np.where(use_q, Q[:-1] - Q[1:], F[1:] - F[:-1])


def band_shares(dfe: Dfe, edges_nes: Iterable[float] = DEFAULT_EDGES_NES) -> np.ndarray:
    r"""Shares of all new selected-class mutations in |Ne s| bands (sum to 1).

    The deleterious part contributes ``(1 - p_b)`` times :func:`deleterious_band_shares`;
    a beneficial point mass ``p_b`` at :math:`S = s_b` is counted in the band that holds
    its :math:`|N_e s| = s_b/4` (so weakly beneficial mutations, :math:`s_b < 4`, are part
    of the effectively neutral band). Use :func:`deleterious_band_shares` for the
    deleterious mutations alone.

    Parameters
    ----------
    dfe : DFE object
    edges_nes : sequence of float, default (0, 1, 10, 100)
        Lower band edges on |Ne s|.

    Returns
    -------
    ndarray, shape (len(edges_nes),), float64

    Examples
    --------
    >>> band_shares(GammaDfe(shape=1.0, mean=10.0)).round(4).tolist()
    [0.3297, 0.652, 0.0183, 0.0]
    """
    base, p_b, s_b = _split(dfe)
    out = deleterious_band_shares(base, edges_nes)
    if p_b > 0:
        e = _check_edges(edges_nes)
        out = (1.0 - p_b) * out
        k = int(np.searchsorted(np.asarray(e), s_b / 4.0, side="right")) - 1
        out[k] += p_b
    return out


# -------------------------------------------------------------------- quadrature in t
@functools.lru_cache(maxsize=64)
def _panels(breaks: tuple[float, ...], per_panel: int = NODES_PER_DECADE
            ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gauss--Legendre nodes and weights in ln t on [T_LO, T_HI], one panel per decade,
    also split at ``breaks``. Returns (t, log_t, weights in ln t)."""
    pts = {10.0 ** k for k in range(round(math.log10(T_LO)), round(math.log10(T_HI)) + 1)}
    pts.update(b for b in breaks if T_LO < b < T_HI)
    edges = np.log(np.array(sorted(pts)))
    xg, wg = np.polynomial.legendre.leggauss(per_panel)
    a, b = edges[:-1, None], edges[1:, None]
    u = (0.5 * (b - a) * xg[None, :] + 0.5 * (a + b)).ravel()
    w = (0.5 * (b - a) * wg[None, :]).ravel()
    return np.exp(u), u, w


_LN10 = math.log(10.0)
_K_LO, _K_HI = round(math.log10(T_LO)), round(math.log10(T_HI)) - 1  # decades of t


@functools.lru_cache(maxsize=256)
def _decade_nodes(k: int, p: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """GL nodes in ln t on decade [10^k, 10^(k+1)] split into p equal panels."""
    edges = _LN10 * (k + np.arange(p + 1) / p)
    xg, wg = np.polynomial.legendre.leggauss(NODES_PER_DECADE)
    a, b = edges[:-1, None], edges[1:, None]
    u = (0.5 * (b - a) * xg[None, :] + 0.5 * (a + b)).ravel()
    w = (0.5 * (b - a) * wg[None, :]).ravel()
    return np.exp(u), u, w


def _fine_plan(base: BaseDfe) -> tuple[int, int, int] | None:
    """(level, first decade, last decade) for a narrow DFE, or None."""
    bulk = base.bulk_log_t() if base.is_narrow() else None
    if bulk is None:
        return None
    c, sd = bulk
    for p in FINE_LEVELS:
        if _LN10 / p <= 4.6 * sd:
            break
    else:
        return None
    k_lo = max(math.floor((c - 14 * sd) / _LN10), _K_LO)
    k_hi = min(math.floor((c + 14 * sd) / _LN10), _K_HI)
    return (p, k_lo, k_hi) if k_lo <= k_hi else None


def _narrow_breaks(base: BaseDfe) -> tuple[float, ...]:
    """Extra panel edges over the bulk of a DFE too narrow for the fine levels."""
    bulk = base.bulk_log_t() if base.is_narrow() else None
    if bulk is None:
        return ()
    c, sd = bulk
    if _LN10 / FINE_LEVELS[-1] <= 4.6 * sd:
        return ()
    step = min(sd, 0.25)
    return tuple(math.exp(c + k * step) for k in range(-int(14 * sd / step) - 1,
                                                       int(14 * sd / step) + 2))


def _breaks(base: BaseDfe) -> tuple[float, ...]:
    return tuple(base.breakpoints_t) + _narrow_breaks(base)


def _nodes_for(base: BaseDfe) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(t, ln t, weights in ln t) of the quadrature used for ``base``."""
    plan = _fine_plan(base)
    if plan is None:
        return _panels(_breaks(base))
    p, k_lo, k_hi = plan
    t, lt, w = _panels(())
    keep = np.ones(t.size, dtype=bool)
    keep[NODES_PER_DECADE * (k_lo - _K_LO):NODES_PER_DECADE * (k_hi + 1 - _K_LO)] = False
    fine = [_decade_nodes(d, p) for d in range(k_lo, k_hi + 1)]
    t2, lt2, w2 = (np.concatenate([v[keep]] + [f[j] for f in fine]) for j, v in
                   enumerate((t, lt, w)))
    return t2, lt2, w2


def _expect_t(base: BaseDfe, fn: Callable[[np.ndarray], np.ndarray],
              small_t: tuple[float, float]) -> float:
    """E[fn(T)] on the same ln t nodes as the DFE-averaged spectra (standard decades,
    refined where a narrow DFE has its bulk); ``small_t = (fn(0), fn'(0))`` for the mass
    below T_LO."""
    t, lt, w = _nodes_for(base)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        dens = np.exp(np.asarray(base.logpdf_t(t, lt)) + lt) * w
    dens[~np.isfinite(dens)] = 0.0
    p0, m0 = base._small_t(T_LO)
    return float(dens @ fn(t)) + p0 * small_t[0] + m0 * small_t[1]


def mean_fixation_ratio(dfe: Dfe) -> float:
    r"""Mean substitution rate of new mutations relative to neutral, :math:`\bar r`.

    :math:`\bar r = E_F[S/(1-e^{-S})]` (Kimura 1962 per mutation), including a
    beneficial point mass: :math:`(1-p_b) E[t/(e^t - 1)] + p_b s_b/(1-e^{-s_b})`.

    For the gamma family the closed form
    :math:`E[t/(e^t-1)] = \beta\lambda^\beta \zeta(\beta+1, 1+\lambda)` (Hurwitz zeta,
    from :math:`t/(e^t-1) = \sum_{k\ge1} t e^{-kt}`) is used; otherwise quadrature in
    ln t.

    Parameters
    ----------
    dfe : DFE object

    Returns
    -------
    float

    Examples
    --------
    >>> round(mean_fixation_ratio(GammaDfe(shape=0.2, mean=100.0)), 4)
    0.3225
    """
    base, p_b, s_b = _split(dfe)
    r = math.nan
    if isinstance(base, GammaDfe):
        b, lam = base.shape, base.rate
        z = float(zeta(b + 1.0, 1.0 + lam))
        if z > 0 and math.isfinite(z):
            r = math.exp(math.log(b) + b * math.log(lam) + math.log(z))
        if not (math.isfinite(r) and r > 0):  # extreme parameters: fall back to quadrature
            r = math.nan
    if math.isnan(r):
        def fn(t: np.ndarray) -> np.ndarray:
            with np.errstate(over="ignore"):  # t/expm1(t) -> 0 for large t, as wanted
                return t / np.expm1(t)
        r = _expect_t(base, fn, (1.0, -0.5))
    if p_b > 0:
        r = (1.0 - p_b) * r + p_b * float(fixation_ratio(s_b))
    return r


def sample_S(dfe: Dfe, size: int | tuple[int, ...],
             rng: np.random.Generator | None = None) -> np.ndarray:
    """Random draws of S = 4 Ne s from a DFE (deleterious negative), e.g. for simulation.

    Parameters
    ----------
    dfe : DFE object
    size : int or tuple of int
        Output shape.
    rng : numpy.random.Generator, optional
        Source of randomness (a fresh default generator if None).

    Returns
    -------
    ndarray, shape ``size``, float64
    """
    rng = np.random.default_rng() if rng is None else rng
    base, p_b, s_b = _split(dfe)
    S = -base.sample_t(size, rng)
    if p_b > 0:
        S = np.where(rng.random(size) < p_b, s_b, S)
    return np.asarray(S, dtype=float)


# --------------------------------------------------------------- DFE-averaged spectra
def _asymptotic_g(n: int, t: np.ndarray) -> np.ndarray:
    r"""g_i(-t) for large t from the terminating expansion (exact up to O(e^{-t})).

    :math:`g_i(-t) = C(n,i)(i-1)!\,t^{-i}\sum_{k=0}^{n-i-1}(i)_k(i+1-n)_k/k!\;t^{-k}`;
    used only for t >= 1e8, where the sum converges in a few terms. Shape (len(t), n-1).
    """
    i = np.arange(1, n, dtype=float)
    tt = np.asarray(t, dtype=float)[:, None]
    term = np.ones((tt.shape[0], n - 1))
    tot = term.copy()
    for k in range(n):
        term = term * (i + k) * (i + 1 - n + k) / ((k + 1) * tt)
        tot += term
        if np.all(np.abs(term) <= 1e-18 * np.abs(tot)):
            break
    logv = _log_binom(n)[None, :] + gammaln(i)[None, :] - i[None, :] * np.log(tt)
    return np.exp(logv) * tot


def _g_rows(k: SfsKernel, t: np.ndarray) -> np.ndarray:
    """g_i(-t_j), shape (len(t), n - 1): the trapezoid kernel up to T_MID, then the
    large-|S| expansion."""
    out = np.empty((t.size, k.n - 1))
    mid = t <= T_MID
    out[mid] = k.g(-t[mid])
    out[~mid] = _asymptotic_g(k.n, t[~mid])
    return out


class _Nodes:
    """Quadrature nodes ``t``, ``log_t`` and ``log_tw`` = ln t + ln(weight in ln t)."""

    t: np.ndarray
    log_t: np.ndarray
    log_tw: np.ndarray

    def node_weights(self, base: BaseDfe) -> np.ndarray:
        """W_j f(t_j) t_j, shape (J,)."""
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            dens = np.exp(np.asarray(base.logpdf_t(self.t, self.log_t)) + self.log_tw)
        if not np.all(np.isfinite(dens)):
            dens[~np.isfinite(dens)] = 0.0
        return dens


class _Fine(_Nodes):
    """Refined nodes over decades k_lo..k_hi (level p) for narrow DFEs."""

    def __init__(self, k: SfsKernel, p: int, k_lo: int, k_hi: int, pieces: dict) -> None:
        parts = []
        for d in range(k_lo, k_hi + 1):
            if (p, d) not in pieces:
                t, _, _ = _decade_nodes(d, p)
                pieces[p, d] = _g_rows(k, t)
            parts.append(pieces[p, d])
        nodes = [_decade_nodes(d, p) for d in range(k_lo, k_hi + 1)]
        self.t = np.concatenate([v[0] for v in nodes])
        self.log_t = np.concatenate([v[1] for v in nodes])
        self.log_tw = self.log_t + np.log(np.concatenate([v[2] for v in nodes]))
        self.G = np.concatenate(parts)
        # rows of the standard table that these nodes replace
        self.std_rows = slice(NODES_PER_DECADE * (k_lo - _K_LO),
                              NODES_PER_DECADE * (k_hi + 1 - _K_LO))


class _Table(_Nodes):
    """Nodes in t and the matrix of g at S = -t, plus two rows for the mass below T_LO."""

    def __init__(self, k: SfsKernel, breaks: tuple[float, ...]) -> None:
        n = k.n
        self.t, self.log_t, self.w = _panels(breaks)
        G = np.empty((self.t.size + 2, n - 1))
        G[0] = 1.0 / np.arange(1, n)           # weight: P(T < T_LO)
        G[1] = -1.0 / (2.0 * (n + 1))          # weight: E[T; T < T_LO]
        G[2:] = _g_rows(k, self.t)
        self.G = G
        self.G_nodes = G[2:]
        self.log_tw = self.log_t + np.log(self.w)

    def weights(self, base: BaseDfe) -> np.ndarray:
        return np.concatenate((base._small_t(T_LO), self.node_weights(base)))

    def mean(self, base: BaseDfe) -> np.ndarray:
        p0, m0 = base._small_t(T_LO)
        return self.node_weights(base) @ self.G_nodes + (p0 * self.G[0] + m0 * self.G[1])



class DfeExpectation:
    r"""DFE-averaged expected spectra for one sample size ``n``.

    :math:`\bar g_i = E_F[g_i(S)]` by fixed Gauss--Legendre panels in :math:`\ln t`
    (16 nodes per decade on :math:`t \in [10^{-8}, 10^{12}]`), with the mass below
    :math:`10^{-8}` taken analytically (:math:`g_i \approx 1/i - t/(2(n+1))`), the
    spectrum above :math:`10^8` from its terminating large-|S| expansion, and a
    beneficial point mass through :meth:`SfsKernel.g` at :math:`+s_b`. The table of
    :math:`g_i(-t_j)` is built once per ``n`` (and once per set of band edges for
    :class:`DiscreteDfe`, whose panels are split at its edges). Narrow DFEs (sd of ln t
    below 0.5, e.g. gamma shape above 4.48) have the decades holding their bulk split
    into 4, 16 or 64 panels, built on first use and cached per decade; only DFEs with
    sd(ln t) < 0.008 get a table of their own per call (slow).

    Parameters
    ----------
    n : int
        Number of sampled gene copies.

    Attributes
    ----------
    n : int
    kernel : SfsKernel
    G : ndarray, shape (J + 2, n - 1), float64
        Standard table for the gamma and lognormal families: row 0 is ``1/i``, row 1 is
        ``-1/(2(n+1))``, rows 2.. are :math:`g_i(-t_j)`; see :meth:`weights`.
    t : ndarray, shape (J,), float64
        Nodes of the standard table.

    Notes
    -----
    ``weights(dfe) @ table(dfe) + beneficial_part(dfe) == mean_g(dfe)``, so a fitter can
    differentiate the weights itself. For :class:`DiscreteDfe`, ``mean_g`` is linear in
    the masses: ``masses @ band_means(edges_nes)``.
    """

    def __init__(self, n: int) -> None:
        self.kernel = kernel(n)
        self.n = self.kernel.n
        self._tables: dict[tuple[float, ...], _Table] = {}
        self._band_means: dict[tuple[float, ...], np.ndarray] = {}
        self._fine_pieces: dict[tuple[int, int], np.ndarray] = {}
        self._fine: dict[tuple[int, int, int], _Fine] = {}
        std = self._table(())
        self._std = std
        self.G = std.G
        self.t = std.t

    def _table(self, breaks: tuple[float, ...]) -> _Table:
        tab = self._tables.get(breaks)
        if tab is None:
            tab = _Table(self.kernel, breaks)
            if len(self._tables) < 16 or not breaks:
                self._tables[breaks] = tab
        return tab

    def _fine_block(self, plan: tuple[int, int, int]) -> _Fine:
        blk = self._fine.get(plan)
        if blk is None:
            blk = _Fine(self.kernel, *plan, self._fine_pieces)
            if len(self._fine) >= 32:
                self._fine.pop(next(iter(self._fine)))
            self._fine[plan] = blk
        return blk

    def _narrow(self, base: BaseDfe) -> tuple[np.ndarray, _Fine] | None:
        """(standard node weights with the refined decades zeroed, fine block) or None."""
        plan = _fine_plan(base)
        if plan is None:
            return None
        blk = self._fine_block(plan)
        w_std = self._std.node_weights(base)
        w_std[blk.std_rows] = 0.0
        return w_std, blk

    def table(self, dfe: Dfe) -> np.ndarray:
        """Table of spectra the weights of ``dfe`` apply to, shape (J' + 2, n - 1)."""
        base, _, _ = _split(dfe)
        plan = _fine_plan(base)
        if plan is not None:
            return np.concatenate((self.G, self._fine_block(plan).G))
        return self._table(_breaks(base)).G

    def weights(self, dfe: Dfe) -> np.ndarray:
        """Quadrature weights of the deleterious part, times ``1 - p_b``.

        Returns
        -------
        ndarray, shape (J' + 2,), float64
            Entries 0 and 1 are P(t < 1e-8) and E[t; t < 1e-8]; the rest are
            :math:`W_j f(t_j) t_j`. Apply to :meth:`table` (``self.G`` for gamma and
            lognormal DFEs of ordinary width).
        """
        base, p_b, _ = _split(dfe)
        nar = self._narrow(base)
        if nar is not None:
            w = np.concatenate((base._small_t(T_LO), nar[0], nar[1].node_weights(base)))
        else:
            w = self._table(_breaks(base)).weights(base)
        return w * (1.0 - p_b) if p_b else w

    @functools.lru_cache(maxsize=32)  # noqa: B019 -- few instances, each kept for a fit
    def _g_plus(self, s_b: float) -> np.ndarray:
        v = self.kernel.g(s_b)
        v.setflags(write=False)
        return v

    def beneficial_part(self, dfe: Dfe) -> np.ndarray:
        """``p_b * g(+s_b)``, shape (n - 1,) (zeros without a beneficial class)."""
        _, p_b, s_b = _split(dfe)
        if p_b == 0:
            return np.zeros(self.n - 1)
        return p_b * self._g_plus(s_b)

    def mean_g(self, dfe: Dfe) -> np.ndarray:
        r"""DFE-averaged expected spectrum :math:`E_F[g_i(S)]`, ``i = 1..n-1``.

        Parameters
        ----------
        dfe : DFE object

        Returns
        -------
        ndarray, shape (n - 1,), float64
            Expected count per unit :math:`\theta L` in each class.
        """
        base, p_b, s_b = _split(dfe)
        if isinstance(base, DiscreteDfe):
            out = np.asarray(base.masses) @ self.band_means(base.edges_nes)
        elif (nar := self._narrow(base)) is not None:
            w_std, blk = nar
            p0, m0 = base._small_t(T_LO)
            out = (w_std @ self._std.G_nodes + blk.node_weights(base) @ blk.G
                   + (p0 * self.G[0] + m0 * self.G[1]))
        else:
            out = self._table(_breaks(base)).mean(base)
        if p_b:
            out = (1.0 - p_b) * out + p_b * self._g_plus(s_b)
        return out

    def mean_g_grad(self, dfe: Dfe, rel_step: float = 1e-6) -> np.ndarray:
        """Derivatives of :meth:`mean_g` with respect to the natural parameters.

        Central finite differences (relative step ``rel_step``) for the continuous
        parameters; exact for the masses of a :class:`DiscreteDfe` (treated as free).

        Returns
        -------
        ndarray, shape (len(dfe.param_names), n - 1), float64
        """
        base, p_b, _ = _split(dfe)
        rows = []
        for name in dfe.param_names:
            if name.startswith("mass_") and isinstance(base, DiscreteDfe):
                k = int(name.split("_")[1])
                rows.append((1.0 - p_b) * self.band_means(base.edges_nes)[k])
                continue
            v = dfe.params[name]
            h = rel_step * max(abs(v), 1e-3)
            if name == "p_b" and v - h < 0:
                lo, hi = v, v + h
            else:
                lo, hi = v - h, v + h
            d = self.mean_g(dfe.with_params(**{name: hi})) - self.mean_g(
                dfe.with_params(**{name: lo}))
            rows.append(d / (hi - lo))
        return np.array(rows)

    def band_means(self, edges_nes: Iterable[float] = DEFAULT_EDGES_NES) -> np.ndarray:
        """Mean spectrum within each band of a :class:`DiscreteDfe`, shape (K, n - 1)."""
        e = _check_edges(edges_nes)
        out = self._band_means.get(e)
        if out is None:
            K = len(e)
            tab = self._table(DiscreteDfe((1.0,) + (0.0,) * (K - 1), e).breakpoints_t)
            out = np.array([tab.mean(DiscreteDfe(tuple(float(j == k) for j in range(K)), e))
                            for k in range(K)])
            out.setflags(write=False)
            self._band_means[e] = out
        return out

    def __repr__(self) -> str:
        return f"DfeExpectation(n={self.n})"
