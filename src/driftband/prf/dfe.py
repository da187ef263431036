r"""Averages over a DFE: expected spectra and the mean fixation ratio.

:class:`DfeExpectation` averages the expected spectrum over a DFE of
:mod:`driftband.prf.families` in tens of microseconds from a table built once per sample
size (fixed Gauss--Legendre panels in ln t, 16 nodes per decade);
:func:`mean_fixation_ratio` is the mean of Kimura's S/(1 - e^-S) over the same nodes.

No I/O happens here.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Iterable
from typing import Any, Literal

import numpy as np
from scipy.special import gammaln, zeta

from ..defaults import DEFAULT_EDGES_NES
from .expected import SfsKernel, _log_binom, fixation_ratio, kernel
from .families import (
    BaseDfe,
    Dfe,
    DiscreteDfe,
    GammaDfe,
    LognormalDfe,
    check_band_edges,
    split_dfe,
)

__all__ = ["DfeExpectation", "mean_fixation_ratio"]

#: Quadrature range in t = -S: below T_LO the mass is handled analytically
#: (g_i(-t) = 1/i - t/(2(n+1)) + O(t^2)); between T_MID and T_HI the spectrum is the
#: terminating large-|S| expansion (exact up to O(e^-t)); mass above T_HI contributes 0.
T_LO, T_MID, T_HI = 1e-8, 1e8, 1e12
#: Gauss--Legendre nodes per panel (one panel per decade of t).
NODES_PER_DECADE = 16
#: Narrow DFEs: the decades holding the bulk (mean +- 14 sd of ln t) are split into
#: this many panels each (the first level with panel width <= 4.6 sd, the ratio that the
#: standard one-panel-per-decade table has at sd = 0.5); narrower still: a table per call.
FINE_LEVELS = (4, 16, 64)


# -------------------------------------------------------------------- quadrature in t
@functools.lru_cache(maxsize=64)
def _panels(
    breaks: tuple[float, ...], per_panel: int = NODES_PER_DECADE
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gauss--Legendre nodes and weights in ln t on [T_LO, T_HI], one panel per decade,
    also split at ``breaks``. Returns (t, log_t, weights in ln t)."""
    pts = {10.0**k for k in range(round(math.log10(T_LO)), round(math.log10(T_HI)) + 1)}
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
    return tuple(
        math.exp(c + k * step) for k in range(-int(14 * sd / step) - 1, int(14 * sd / step) + 2)
    )


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
    keep[NODES_PER_DECADE * (k_lo - _K_LO) : NODES_PER_DECADE * (k_hi + 1 - _K_LO)] = False
    fine = [_decade_nodes(d, p) for d in range(k_lo, k_hi + 1)]
    t2, lt2, w2 = (
        np.concatenate([v[keep]] + [f[j] for f in fine]) for j, v in enumerate((t, lt, w))
    )
    return t2, lt2, w2


def _expect_t(
    base: BaseDfe, fn: Callable[[np.ndarray], np.ndarray], small_t: tuple[float, float]
) -> float:
    """E[fn(T)] on the same ln t nodes as the DFE-averaged spectra (standard decades,
    refined where a narrow DFE has its bulk); ``small_t = (fn(0), fn'(0))`` for the mass
    below T_LO."""
    t, lt, w = _nodes_for(base)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        dens = np.exp(np.asarray(base.logpdf_t(t, lt)) + lt) * w
    dens[~np.isfinite(dens)] = 0.0
    p0, m0 = base._small_t(T_LO)
    return float(dens @ fn(t)) + p0 * small_t[0] + m0 * small_t[1]


def mean_fixation_ratio(dfe: Dfe, part: Literal["all", "deleterious"] = "all") -> float:
    r"""Mean substitution rate of new mutations relative to neutral, :math:`\bar r`.

    :math:`\bar r = E_F[S/(1-e^{-S})]` (Kimura 1962 per mutation). With a beneficial
    point mass, ``part="all"`` gives :math:`(1-p_b)\,\bar r_{del} + p_b\,u(s_b)` and
    ``part="deleterious"`` gives :math:`\bar r_{del} = E[t/(e^t - 1)]` over the deleterious
    part alone (not weighted by :math:`1-p_b`), with :math:`u(S) = S/(1-e^{-S})`. Without a
    beneficial class the two are equal.

    For the gamma family the closed form
    :math:`E[t/(e^t-1)] = \beta\lambda^\beta \zeta(\beta+1, 1+\lambda)` (Hurwitz zeta,
    from :math:`t/(e^t-1) = \sum_{k\ge1} t e^{-kt}`) is used; otherwise quadrature in
    ln t.

    Parameters
    ----------
    dfe : DFE object
    part : {"all", "deleterious"}
        The whole DFE, or its deleterious part only.

    Returns
    -------
    float

    Examples
    --------
    >>> round(mean_fixation_ratio(GammaDfe(shape=0.2, mean=100.0)), 4)
    0.3225
    """
    if part not in ("all", "deleterious"):
        raise ValueError(f"part must be 'all' or 'deleterious', not {part!r}")
    base, p_b, s_b = split_dfe(dfe)
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
    if p_b > 0 and part == "all":
        r = (1.0 - p_b) * r + p_b * float(fixation_ratio(s_b))
    return r


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
        self.std_rows = slice(
            NODES_PER_DECADE * (k_lo - _K_LO), NODES_PER_DECADE * (k_hi + 1 - _K_LO)
        )


class _Table(_Nodes):
    """Nodes in t and the matrix of g at S = -t, plus two rows for the mass below T_LO."""

    def __init__(self, k: SfsKernel, breaks: tuple[float, ...]) -> None:
        n = k.n
        self.t, self.log_t, self.w = _panels(breaks)
        G = np.empty((self.t.size + 2, n - 1))
        G[0] = 1.0 / np.arange(1, n)  # weight: P(T < T_LO)
        G[1] = -1.0 / (2.0 * (n + 1))  # weight: E[T; T < T_LO]
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
    spectra : SfsKernel or HistoryKernel, optional
        Where the spectra :math:`g_i(S)` come from (default: the equilibrium
        :func:`~driftband.prf.expected.kernel` of ``n``; a
        :class:`~driftband.prf.history_table.HistoryKernel` for a size history). Above
        :math:`t = 10^8` the equilibrium expansion is used either way.

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

    def __init__(self, n: int, spectra: Any = None) -> None:
        self.kernel = kernel(n) if spectra is None else spectra
        if self.kernel.n != n:
            raise ValueError(f"`spectra` is for n = {self.kernel.n}, not n = {n}")
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
        base, _, _ = split_dfe(dfe)
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
        base, p_b, _ = split_dfe(dfe)
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
        _, p_b, s_b = split_dfe(dfe)
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
        base, p_b, s_b = split_dfe(dfe)
        if isinstance(base, DiscreteDfe):
            out = np.asarray(base.masses) @ self.band_means(base.edges_nes)
        elif (nar := self._narrow(base)) is not None:
            w_std, blk = nar
            p0, m0 = base._small_t(T_LO)
            out = (
                w_std @ self._std.G_nodes
                + blk.node_weights(base) @ blk.G
                + (p0 * self.G[0] + m0 * self.G[1])
            )
        else:
            out = self._table(_breaks(base)).mean(base)
        if p_b:
            out = (1.0 - p_b) * out + p_b * self._g_plus(s_b)
        return out

    def mean_g_grad(self, dfe: Dfe, rel_step: float = 1e-6) -> np.ndarray:
        r"""Derivatives of :meth:`mean_g` with respect to the natural parameters.

        The derivative of the quadrature itself (so that it is the exact gradient of what
        :meth:`mean_g` computes, on the same nodes): :math:`\partial_\theta \bar g
        = \sum_j W_j f(t_j) t_j\, \partial_\theta \ln f(t_j)\, g(-t_j)` with the
        families' :meth:`~driftband.prf.families.GammaDfe.dlogpdf_t`, plus the derivatives
        of the two moments of the mass below 1e-8 (``small_t_grad`` of the family: exact
        but for the gamma shape, a central difference of relative step ``rel_step``).
        Exact for the masses of a
        :class:`DiscreteDfe` (treated as free: the rows are the band means), for ``p_b``
        (:math:`g(s_b) - \bar g_{del}`) and for ``s_b``
        (:meth:`~driftband.prf.expected.SfsKernel.dg_beneficial`). The panel plan of a
        narrow DFE is held fixed (it changes in steps with the parameters).

        Parameters
        ----------
        dfe : DFE object
        rel_step : float
            Relative step of the differences for the mass below 1e-8.

        Returns
        -------
        ndarray, shape (len(dfe.param_names), n - 1), float64
        """
        base, p_b, s_b = split_dfe(dfe)
        if isinstance(base, DiscreteDfe):
            rows = np.array(self.band_means(base.edges_nes), dtype=float)
        else:
            rows = self._quadrature_grad(base, rel_step)
        if not p_b:
            return rows
        extra = np.stack(
            [
                self._g_plus(s_b) - self.mean_g(base),
                p_b * self.kernel.dg_beneficial(s_b),
            ]
        )
        return np.concatenate(((1.0 - p_b) * rows, extra))

    def _quadrature_grad(self, base: GammaDfe | LognormalDfe, rel_step: float) -> np.ndarray:
        """Derivatives of the quadrature of a continuous family, shape (2, n - 1)."""
        nar = self._narrow(base)
        if nar is not None:
            w_std, blk = nar
            segs: list[tuple[_Nodes, np.ndarray, np.ndarray]] = [
                (self._std, w_std, self._std.G_nodes),
                (blk, blk.node_weights(base), blk.G),
            ]
        else:
            tab = self._table(_breaks(base))
            segs = [(tab, tab.node_weights(base), tab.G_nodes)]
        out = np.zeros((len(base.param_names), self.n - 1))
        for nodes, w, G in segs:
            live = w > 0
            score = base.dlogpdf_t(nodes.t[live], nodes.log_t[live])
            out += (score * w[live]) @ G[live]
        # the mass below T_LO: P(T < T_LO) on row 0 of G, E[T; T < T_LO] on row 1
        return out + base.small_t_grad(T_LO, rel_step) @ self.G[:2]

    def band_means(self, edges_nes: Iterable[float] = DEFAULT_EDGES_NES) -> np.ndarray:
        """Mean spectrum within each band of a :class:`DiscreteDfe`, shape (K, n - 1)."""
        e = check_band_edges(edges_nes)
        out = self._band_means.get(e)
        if out is None:
            K = len(e)
            tab = self._table(DiscreteDfe((1.0,) + (0.0,) * (K - 1), e).breakpoints_t)
            out = np.array(
                [tab.mean(DiscreteDfe(tuple(float(j == k) for j in range(K)), e)) for k in range(K)]
            )
            out.setflags(write=False)
            self._band_means[e] = out
        return out

    def __repr__(self) -> str:
        return f"DfeExpectation(n={self.n})"
