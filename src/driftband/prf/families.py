r"""Distributions of fitness effects (DFEs) on the scaled axis S = 4 Ne s, and band shares.

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

Functions: :func:`band_shares`, :func:`deleterious_band_shares`, :func:`sample_S`. The
averages over a DFE (expected spectra, fixation ratio) are in :mod:`driftband.prf.dfe`.

No I/O happens here.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, TypeVar, cast

import numpy as np
from numpy.typing import ArrayLike
from scipy.optimize import brentq
from scipy.special import digamma, gammainc, gammaincc, ndtr, polygamma

from ..defaults import DEFAULT_EDGES_NES

__all__ = [
    "BaseDfe",
    "Dfe",
    "DiscreteDfe",
    "GammaDfe",
    "LognormalDfe",
    "WithBeneficial",
    "band_shares",
    "check_band_edges",
    "deleterious_band_shares",
    "discrete_family_edges",
    "sample_S",
    "split_dfe",
]

#: Width, in decades of t, of the open last band of :class:`DiscreteDfe`.
OPEN_BAND_DECADES = 3.0
#: A DFE whose ln t has a standard deviation below this gets extra panels over its bulk.
NARROW_SD = 0.5
#: Gamma shape above which sd(ln t) = sqrt(trigamma(shape)) < NARROW_SD.
_GAMMA_NARROW_SHAPE = float(brentq(lambda b: polygamma(1, b) - NARROW_SD**2, 0.5, 100.0))


def _check_pos(name: str, value: float) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise ValueError(f"`{name}` must be a positive finite number, got {value!r}")
    return v


def check_band_edges(edges_nes: Iterable[float]) -> tuple[float, ...]:
    e = tuple(float(v) for v in edges_nes)
    if len(e) < 2 or e[0] != 0.0:
        raise ValueError(
            f"band edges on |Ne s| must start at 0 and have at least two "
            f"values, e.g. 0,1,10,100; got {edges_nes!r}"
        )
    if not all(math.isfinite(v) for v in e) or any(b <= a for a, b in zip(e, e[1:])):
        raise ValueError(
            f"band edges on |Ne s| must be finite and strictly increasing, got {edges_nes!r}"
        )
    return e


#: The discrete family splits the band that starts at 0 at this fraction of its upper edge.
FIRST_BAND_SPLIT = 0.25


def discrete_family_edges(edges_nes: Iterable[float]) -> tuple[float, ...]:
    r"""Band edges of the fitted discrete family: the report bands, the first one split.

    Within a band the family's density is uniform in :math:`t = -S`. On the band that
    starts at :math:`t = 0` that assumption is far from any smooth DFE (a gamma of shape
    below 1 has most of that band's mass near 0), and a uniform band then needs more mass
    to give the same polymorphism: on expected spectra of a gamma DFE of shape 0.3 and mean
    |S| 200 (n = 20, 10^5 sites), the unsplit family gives 0.333 for a true share of
    |Ne·s| < 1 of 0.240 (``benchmarks/bench_averaging_bias.py``). Splitting that band at a
    quarter of its upper edge (|S| = 1 for the default bands) lets two masses follow the
    density's slope (0.252 on the same spectra). Shares are still reported on the report
    bands (the two masses of the first band add up).

    Parameters
    ----------
    edges_nes : iterable of float
        Report band edges on |Ne s| (first 0).

    Returns
    -------
    tuple of float

    Examples
    --------
    >>> discrete_family_edges((0, 1, 10, 100))
    (0.0, 0.25, 1.0, 10.0, 100.0)
    """
    e = check_band_edges(edges_nes)
    return (0.0, FIRST_BAND_SPLIT * e[1]) + e[1:]


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

    def dlogpdf_t(self, t: ArrayLike, log_t: np.ndarray | None = None) -> np.ndarray:
        r"""Derivatives of :meth:`logpdf_t` with respect to (shape, mean), shape (2, len(t)).

        With :math:`\lambda = \beta/\bar S`,
        :math:`\partial_\beta \ln f = \ln\lambda + 1 - \psi(\beta) + \ln t - t/\bar S`
        and :math:`\partial_{\bar S} \ln f = (\lambda t - \beta)/\bar S`.
        """
        t = np.asarray(t, dtype=float)
        lt = np.log(t) if log_t is None else log_t
        b, m = self.shape, self.mean
        lam = b / m
        d_shape = (math.log(lam) + 1.0 - float(digamma(b))) + lt - t / m
        return np.stack([d_shape, (lam * t - b) / m])

    def partial_mean_t(self, c: float) -> float:
        """E[T; T < c] (float)."""
        return float(self.mean * gammainc(self.shape + 1.0, self.rate * c))

    def small_t_grad(self, c: float, rel_step: float = 1e-6) -> np.ndarray:
        r"""Derivatives of (P(T < c), E[T; T < c]) w.r.t. (shape, mean), shape (2, 2).

        In the mean exact: with :math:`x = \lambda c`, :math:`\partial x/\partial\bar S
        = -x/\bar S` and :math:`\partial_x P(a, x) = x^{a-1}e^{-x}/\Gamma(a)`. In the
        shape by a central difference of the regularised incomplete gamma function
        (relative step ``rel_step``; scipy has no derivative in its first argument).
        """
        b, m = self.shape, self.mean
        x = b * c / m
        h = rel_step * b
        up, dn = b + h, b - h
        P = gammainc(np.array([up, up + 1.0, dn, dn + 1.0]), np.array([up, up, dn, dn]) * (c / m))
        d_shape = np.array([P[0] - P[2], m * (P[1] - P[3])]) / (2.0 * h)
        # x^a e^{-x} / Gamma(a + 1), in logs
        dens1 = math.exp(b * math.log(x) - x - math.lgamma(b + 1.0)) if x > 0 else 0.0
        d_mean = np.array([-dens1 * b / m, float(gammainc(b + 1.0, x)) - x * dens1])
        return np.stack([d_shape, d_mean])

    def _small_t(self, c: float) -> tuple[float, float]:
        """(P(T < c), E[T; T < c]) in one call."""
        P = gammainc(np.array([self.shape, self.shape + 1.0]), self.rate * c)
        return float(P[0]), float(self.mean * P[1])

    def is_narrow(self) -> bool:
        """Whether sd(ln t) < NARROW_SD (needs refined panels)."""
        return self.shape > _GAMMA_NARROW_SHAPE

    def bulk_log_t(self) -> tuple[float, float]:
        return (
            float(digamma(self.shape) - math.log(self.rate)),
            float(math.sqrt(polygamma(1, self.shape))),
        )

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

    def dlogpdf_t(self, t: ArrayLike, log_t: np.ndarray | None = None) -> np.ndarray:
        r"""Derivatives of :meth:`logpdf_t` with respect to (mu, sigma), shape (2, len(t)).

        With :math:`z = (\ln t - \mu)/\sigma`: :math:`\partial_\mu \ln f = z/\sigma`,
        :math:`\partial_\sigma \ln f = (z^2 - 1)/\sigma`.
        """
        lt = np.log(np.asarray(t, dtype=float)) if log_t is None else log_t
        z = (lt - self.mu) / self.sigma
        return np.stack([z / self.sigma, (z * z - 1.0) / self.sigma])

    def is_narrow(self) -> bool:
        """Whether sd(ln t) < NARROW_SD (needs refined panels)."""
        return self.sigma < NARROW_SD

    def partial_mean_t(self, c: float) -> float:
        """E[T; T < c] (float)."""
        s = self.sigma
        return float(math.exp(self.mu + 0.5 * s * s) * ndtr((math.log(c) - self.mu) / s - s))

    def small_t_grad(self, c: float, rel_step: float = 1e-6) -> np.ndarray:
        r"""Derivatives of (P(T < c), E[T; T < c]) w.r.t. (mu, sigma), shape (2, 2).

        Exact: with :math:`z = (\ln c - \mu)/\sigma`, :math:`y = z - \sigma` and
        :math:`M = e^{\mu + \sigma^2/2}`, :math:`P = \Phi(z)` and
        :math:`E = M\Phi(y)`, so :math:`\partial_\mu P = -\phi(z)/\sigma`,
        :math:`\partial_\sigma P = -z\phi(z)/\sigma`, :math:`\partial_\mu E = E -
        M\phi(y)/\sigma`, :math:`\partial_\sigma E = \sigma E - M\phi(y)(z/\sigma + 1)`.
        ``rel_step`` is not used (the signature is shared with the gamma family).
        """
        mu, s = self.mu, self.sigma
        z = (math.log(c) - mu) / s
        y = z - s
        log_phi = -0.5 * math.log(2.0 * math.pi)
        phi_z = math.exp(log_phi - 0.5 * z * z)
        m_phi_y = math.exp(mu + 0.5 * s * s + log_phi - 0.5 * y * y)
        e = self.partial_mean_t(c)
        return np.array(
            [
                [-phi_z / s, e - m_phi_y / s],
                [-z * phi_z / s, s * e - m_phi_y * (z / s + 1.0)],
            ]
        )

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
        e = check_band_edges(self.edges_nes)
        m = tuple(float(v) for v in self.masses)
        if len(m) != len(e):
            raise ValueError(
                f"`masses` needs one value per band ({len(e)} bands for edges {e}), got {len(m)}"
            )
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
        out.append((e[-1], e[-1] * 10.0**OPEN_BAND_DECADES, True))
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
        return cast(
            np.ndarray,
            sum(m * self._frac(t, a, b, lg) for m, (a, b, lg) in zip(self.masses, self.bands_t)),
        )

    def sf_t(self, t: ArrayLike) -> np.ndarray:
        """P(T > t), array like ``t``."""
        return cast(
            np.ndarray,
            sum(
                m * (1.0 - self._frac(t, a, b, lg))
                for m, (a, b, lg) in zip(self.masses, self.bands_t)
            ),
        )

    def logpdf_t(self, t: ArrayLike, log_t: np.ndarray | None = None) -> np.ndarray:
        """Log density of t (``-inf`` outside the support), array like ``t``."""
        t = np.asarray(t, dtype=float)
        dens = np.zeros_like(t)
        for m, (a, b, lg) in zip(self.masses, self.bands_t):
            inside = (t >= a) & (t < b)
            dens = dens + np.where(inside, m / (t * math.log(b / a)) if lg else m / (b - a), 0.0)
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


def split_dfe(dfe: Dfe) -> tuple[BaseDfe, float, float]:
    """(deleterious base, p_b, s_b)."""
    if isinstance(dfe, WithBeneficial):
        return dfe.base, dfe.p_b, dfe.s_b
    if isinstance(dfe, _Deleterious):
        return dfe, 0.0, 0.0
    raise TypeError(f"expected a DFE object, got {type(dfe).__name__}")


# ------------------------------------------------------------------------ band shares
def deleterious_band_shares(dfe: Dfe, edges_nes: Iterable[float] = DEFAULT_EDGES_NES) -> np.ndarray:
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
    base, _, _ = split_dfe(dfe)
    e = check_band_edges(edges_nes)
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
    base, p_b, s_b = split_dfe(dfe)
    out = deleterious_band_shares(base, edges_nes)
    if p_b > 0:
        e = check_band_edges(edges_nes)
        out = (1.0 - p_b) * out
        k = int(np.searchsorted(np.asarray(e), s_b / 4.0, side="right")) - 1
        out[k] += p_b
    return out


def sample_S(
    dfe: Dfe, size: int | tuple[int, ...], rng: np.random.Generator | None = None
) -> np.ndarray:
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
    base, p_b, s_b = split_dfe(dfe)
    S = -base.sample_t(size, rng)
    if p_b > 0:
        S = np.where(rng.random(size) < p_b, s_b, S)
    return np.asarray(S, dtype=float)
