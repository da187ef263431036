r"""Poisson-random-field likelihood of a neutral and a selected spectrum (no I/O).

Model (conventions as in the README: S = 4 Ne s, fitnesses 1 : 1+s : 1+2s). For
polymorphic class :math:`i` of a sample of :math:`n` copies,

.. math::

    E[\xi^N_i] = \theta L_N\, r_i / i, \qquad
    E[\xi^S_i] = \theta L_S\, r_i\, \bar g_i(\mathrm{DFE}),

where :math:`\bar g_i` is the DFE-averaged expected count per :math:`\theta L`
(Sawyer & Hartl 1992) and the :math:`r_i` (:math:`r_1 = 1`) are nuisance parameters that
absorb demography and sampling in both classes alike (Eyre-Walker, Woolfit & Phelps
2006). Ancestral misidentification mixes true class :math:`i` into observed
:math:`n - i`: observed :math:`(1-\varepsilon) r_i E_i + \varepsilon r_{n-i} E_{n-i}`.
Folded spectra use :math:`\eta_j = E_j + E_{n-j}` with one nuisance factor per folded
class. The log-likelihood is Poisson over the polymorphic entries.

Writing :math:`c_i = \theta r_i`, the :math:`c_i` are profiled out: in closed form
without misorientation (then the profile is a binomial likelihood of the selected share
of the polymorphisms in each class), by Newton steps over the independent pairs
:math:`(i, n-i)` with it. Under equilibrium (all :math:`r_i = 1`) only :math:`\theta` is profiled.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import gammaln, xlogy

from ..exceptions import InputError
from ..prf.dfe import DfeExpectation

if TYPE_CHECKING:
    from ..spectra import PopulationSpectra
    from .models import DfeModel

__all__ = ["SpectrumPair", "profile_counts", "poisson_loglik"]


@dataclass
class SpectrumPair:
    """The data of one population: polymorphic entries of the neutral and selected class.

    Attributes
    ----------
    n : int
        Gene copies.
    folded : bool
    neutral, selected : ndarray of float, shape (m,)
        Counts of polymorphic classes: i = 1..n−1 (unfolded) or j = 1..n//2 (folded).
    sites_neutral, sites_selected : float
        Callable sites L_N and L_S.
    fixed_neutral, fixed_selected : float or None
        Entry n (fixed derived in the sample) of unfolded spectra: divergence counts.
    """

    n: int
    folded: bool
    neutral: np.ndarray
    selected: np.ndarray
    sites_neutral: float
    sites_selected: float
    fixed_neutral: float | None = None
    fixed_selected: float | None = None

    @classmethod
    def from_population(
        cls,
        pop: PopulationSpectra,
        neutral: str = "4fold",
        selected: str = "0fold",
        path: str | None = None,
    ) -> SpectrumPair:
        """Take the two classes of a :class:`~driftband.spectra.PopulationSpectra`.

        Parameters
        ----------
        pop : PopulationSpectra
            One population's spectra, by site class.
        neutral, selected : str
            The site classes used as the neutral and the selected class.
        path : str, optional
            The file the spectra came from (for messages).

        Raises
        ------
        InputError
            A missing class, n < 4, no callable sites, an all-zero selected spectrum.
        """
        for c in (neutral, selected):
            if c not in pop.classes:
                raise InputError(
                    f"population {pop.name!r} has no class {c!r} (it has "
                    f"{', '.join(sorted(pop.classes)) or 'none'}); choose with "
                    "--neutral/--selected",
                    path,
                )
        if pop.n < 4:
            raise InputError(
                f"population {pop.name!r}: n = {pop.n} gene copies; a fit needs n >= 4", path
            )
        cn, cs = pop.classes[neutral], pop.classes[selected]
        return cls.from_arrays(
            pop.n, pop.folded, cn.sfs, cs.sfs, cn.sites, cs.sites, name=pop.name, path=path
        )

    @classmethod
    def from_arrays(
        cls,
        n: int,
        folded: bool,
        neutral_sfs: ArrayLike,
        selected_sfs: ArrayLike,
        sites_neutral: float,
        sites_selected: float,
        name: str = "",
        path: str | None = None,
    ) -> SpectrumPair:
        """Build from full spectra (length n+1, or n//2+1 when folded).

        Parameters
        ----------
        n : int
            Gene copies.
        folded : bool
            The spectra are folded.
        neutral_sfs, selected_sfs : array_like of float, shape (n+1,) or (n//2+1,)
            Full spectra of the two classes (entry 0 and, unfolded, entry n included).
        sites_neutral, sites_selected : float
            Callable sites of the two classes.
        name : str
            Population name (for messages).
        path : str, optional
            The file the spectra came from (for messages).

        Raises
        ------
        InputError
            A class without callable sites or without polymorphic sites.
        """
        nsfs = np.asarray(neutral_sfs, dtype=float)
        ssfs = np.asarray(selected_sfs, dtype=float)
        hi = n // 2 + 1 if folded else n
        xn, xs = nsfs[1:hi], ssfs[1:hi]
        who = f"population {name!r}" if name else "spectra"
        for label, x, L in (("neutral", xn, sites_neutral), ("selected", xs, sites_selected)):
            if L <= 0:
                raise InputError(f"{who}: the {label} class has no callable sites", path)
            if x.sum() <= 0:
                raise InputError(
                    f"{who}: the {label} spectrum has no polymorphic sites; nothing to fit", path
                )
        fixed = (None, None) if folded else (float(nsfs[n]), float(ssfs[n]))
        return cls(n, folded, xn, xs, float(sites_neutral), float(sites_selected), *fixed)

    @property
    def neutral_pi(self) -> float:
        """π per site of the neutral class (Tajima 1983) from its polymorphic entries."""
        from ..spectra.stats import pi_theta_counts

        sfs = np.concatenate([[0.0], self.neutral])
        return pi_theta_counts(sfs, self.n, self.folded)[0] / self.sites_neutral

    @property
    def m(self) -> int:
        """Number of polymorphic classes."""
        return self.neutral.size

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (the ``data`` of a population in a fit file)."""
        return {
            "n": self.n,
            "folded": self.folded,
            "neutral": self.neutral.tolist(),
            "selected": self.selected.tolist(),
            "sites_neutral": self.sites_neutral,
            "sites_selected": self.sites_selected,
            "fixed_neutral": self.fixed_neutral,
            "fixed_selected": self.fixed_selected,
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> SpectrumPair:
        """The data back from :meth:`to_dict`.

        Raises
        ------
        KeyError, TypeError, ValueError
            A missing or malformed entry.
        """
        fn, fs = d.get("fixed_neutral"), d.get("fixed_selected")
        return cls(
            int(d["n"]),
            bool(d["folded"]),
            np.asarray(d["neutral"], float),
            np.asarray(d["selected"], float),
            float(d["sites_neutral"]),
            float(d["sites_selected"]),
            None if fn is None else float(fn),
            None if fs is None else float(fs),
        )


def poisson_loglik(obs: np.ndarray, lam: np.ndarray) -> float:
    """Full Poisson log-likelihood Σ x log λ − λ − log x! (0·log 0 = 0)."""
    return float(np.sum(xlogy(obs, lam) - lam - gammaln(obs + 1.0)))


def _newton_pairs(xn, xs, a, b, eps, c0, tol=1e-11, max_iter=100):
    """Maximise the Poisson likelihood over c with misorientation, pair by pair.

    True classes i and n−i share observations only with each other, so the profile splits
    into independent two-parameter problems (u = c_i, v = c_{n−i}). Each is concave in
    (u, v) (the expectations are linear in them); damped Newton steps keep u, v ≥ 0, and
    a coordinate whose maximum lies on its bound 0 is held there (an active set).
    The middle class of an even n has the closed form (x^N + x^S)/(a + b).
    """
    m = a.size
    h = m // 2
    lo, hi = np.arange(h), m - 1 - np.arange(h)
    c = c0.copy()
    if m % 2:
        j = h
        c[j] = (xn[j] + xs[j]) / (a[j] + b[j])
    # Observations of a pair: rows (neutral at i, selected at i, neutral at n−i, selected
    # at n−i); columns u, v: derivatives of the expectations.
    du = np.stack([(1 - eps) * a[lo], (1 - eps) * b[lo], eps * a[lo], eps * b[lo]])
    dv = np.stack([eps * a[hi], eps * b[hi], (1 - eps) * a[hi], (1 - eps) * b[hi]])
    x = np.stack([xn[lo], xs[lo], xn[hi], xs[hi]])
    u, v = c[lo].copy(), c[hi].copy()
    tiny = 1e-300
    scale = max(float(np.mean(c0)), tiny) * 1e-3
    floor = tol * scale
    # (numpy calls on arrays of a few dozen entries: their count is the cost here)
    ddu, ddv, duv = du * du, dv * dv, du * dv
    tot = None
    for _ in range(max_iter):
        lam = du * u + dv * v
        pos = lam > 0
        r = np.divide(x, lam, out=np.zeros_like(lam), where=pos)
        w = np.divide(r, lam, out=np.zeros_like(lam), where=pos)
        r -= 1.0
        gu = np.einsum("ij,ij->j", r, du)
        gv = np.einsum("ij,ij->j", r, dv)
        huu = -np.einsum("ij,ij->j", w, ddu)
        hvv = -np.einsum("ij,ij->j", w, ddv)
        huv = -np.einsum("ij,ij->j", w, duv)
        det = huu * hvv - huv * huv
        ok = det > 0
        if ok.all():
            su = (huv * gv - hvv * gu) / det
            sv = (huv * gu - huu * gv) / det
        else:
            safe = np.where(ok, det, 1.0)
            su = np.where(ok, (huv * gv - hvv * gu) / safe, 0.0)
            sv = np.where(ok, (huv * gu - huu * gv) / safe, 0.0)
            # Degenerate pairs (no counts on one side): fall back to one EM-like update.
            bad = ~ok
            if tot is None:
                tot = (du + dv).sum(axis=0)
            lam_t = np.maximum(lam, tiny)
            su = np.where(bad, (x * du * u / lam_t).sum(0) / tot - u, su)
            sv = np.where(bad, (x * dv * v / lam_t).sum(0) / tot - v, sv)
        # A coordinate at its bound 0 (below the absolute floor) whose score points out of
        # the domain is held at 0, and the other takes its one-dimensional Newton step;
        # otherwise the shared step length would stall it as the first one nears 0.
        hold_v = (v <= floor) & (gv <= 0)
        hold_u = (u <= floor) & (gu <= 0)
        if hold_v.any() or hold_u.any():
            with np.errstate(divide="ignore", invalid="ignore"):
                su = np.where(hold_v, np.where(huu < 0, -gu / huu, 0.0), su)
                sv = np.where(hold_u, np.where(hvv < 0, -gv / hvv, 0.0), sv)
            su = np.where(hold_u, 0.0, su)
            sv = np.where(hold_v, 0.0, sv)
            u, v = np.where(hold_u, 0.0, u), np.where(hold_v, 0.0, v)
        # Largest step in (0, 1] keeping u, v positive (at most 0.9 of the way to zero).
        neg_u, neg_v = su < 0, sv < 0
        if neg_u.any() or neg_v.any():
            with np.errstate(divide="ignore", invalid="ignore"):
                au = np.where(neg_u, -0.9 * u / su, np.inf)
                av = np.where(neg_v, -0.9 * v / sv, np.inf)
            step = np.minimum(1.0, np.minimum(au, av))
            full = bool(np.all(step >= 1.0))
            nu, nv = u + step * su, v + step * sv
        else:
            full = True
            nu, nv = u + su, v + sv
        # Converged when the steps are negligible relative to the scale of c (an
        # absolute floor keeps pairs whose optimum is at u = 0 or v = 0 from iterating on)
        # and none was shortened by the bound (the next iteration holds that coordinate).
        done = (
            full
            and bool(np.all(np.abs(nu - u) <= tol * np.maximum(nu, scale)))
            and bool(np.all(np.abs(nv - v) <= tol * np.maximum(nv, scale)))
        )
        u, v = np.maximum(nu, 0.0), np.maximum(nv, 0.0)
        if done:
            break
    c[lo], c[hi] = u, v
    return c


def _fold(data: SpectrumPair, v: np.ndarray) -> np.ndarray:
    """Per-class rates of the unfolded classes i = 1..n−1 (last axis) on the data's classes:
    unchanged, or folded (j and n−j summed; the middle class of an even n once)."""
    if not data.folded:
        return v
    n, h = data.n, data.n // 2
    out = v[..., :h] + v[..., ::-1][..., :h]
    if n % 2 == 0:
        out[..., -1] = v[..., h - 1]
    return out


def _neutral_shape(n: int, neutral_g: np.ndarray | None) -> np.ndarray:
    """Neutral expectation per θL of the unfolded classes: ``1/i`` or the one given."""
    return 1.0 / np.arange(1, n) if neutral_g is None else neutral_g


def profile_counts(
    data: SpectrumPair,
    gbar: np.ndarray,
    eps: float = 0.0,
    equilibrium: bool = False,
    c0: np.ndarray | None = None,
    neutral_g: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Profile out θ·r_i; return ``(c, lam_neutral, lam_selected)``.

    Parameters
    ----------
    data : SpectrumPair
    gbar : ndarray, shape (n−1,)
        DFE-averaged expected counts per θL for i = 1..n−1 (unfolded classes).
    eps : float
        Ancestral misidentification rate (ignored for folded data).
    equilibrium : bool
        All r_i = 1: only θ is free.
    c0 : ndarray, optional
        Starting values of the Newton iteration (default: the ε = 0 profile).
    neutral_g : ndarray, shape (n−1,), optional
        Expected neutral counts per θL for i = 1..n−1 (default ``1/i``, the constant-size
        spectrum; a size history's neutral spectrum otherwise).

    Returns
    -------
    c : ndarray, shape (m,)
        θ·r_i per (true) class.
    lam_neutral, lam_selected : ndarray, shape (m,)
        Expected observed counts.
    """
    a = _fold(data, data.sites_neutral * _neutral_shape(data.n, neutral_g))
    b = _fold(data, data.sites_selected * gbar)
    if data.folded:
        eps = 0.0
    xn, xs = data.neutral, data.selected
    if eps == 0.0:
        if equilibrium:
            c = np.full(a.size, (xn.sum() + xs.sum()) / (a.sum() + b.sum()))
        else:
            c = (xn + xs) / (a + b)
        return c, c * a, c * b
    ra, rb = a[::-1], b[::-1]
    if equilibrium:
        na = (1 - eps) * a + eps * ra
        nb = (1 - eps) * b + eps * rb
        c = np.full(a.size, (xn.sum() + xs.sum()) / (na.sum() + nb.sum()))
        return c, c * na, c * nb
    if c0 is None or c0.shape != a.shape:
        c0 = np.maximum((xn + xs) / (a + b), 1e-300)
    c = _newton_pairs(xn, xs, a, b, eps, c0)
    rc = c[::-1]
    return c, (1 - eps) * c * a + eps * rc * ra, (1 - eps) * c * b + eps * rc * rb


class Objective:
    """Negative profile log-likelihood of one population for one DFE model.

    Parameters
    ----------
    data : SpectrumPair
    model : DfeModel
    eps : float or None
        Fixed misorientation rate, or None to estimate it (unfolded data only).
    equilibrium : bool
    expectation : DfeExpectation, optional
        Reuse a per-n table (for a size history: its table).
    neutral_g : ndarray, optional
        The neutral spectrum per θL of a size history (default ``1/i``); see
        :func:`profile_counts`.

    Attributes
    ----------
    analytic_gradient : bool
        Fits use :meth:`value_and_grad` (default); ``False`` on the class falls back to
        the optimiser's finite differences everywhere (kept for benchmarks and checks).
    """

    analytic_gradient: ClassVar[bool] = True

    def __init__(
        self,
        data: SpectrumPair,
        model: DfeModel,
        eps: float | None = 0.0,
        equilibrium: bool = False,
        expectation: DfeExpectation | None = None,
        neutral_g: np.ndarray | None = None,
    ) -> None:
        self.data = data
        self.neutral_g = neutral_g
        self.model = model
        self.free_eps = eps is None and not data.folded
        self.eps = 0.0 if (eps is None or data.folded) else float(eps)
        self.equilibrium = equilibrium
        self.expect = expectation or DfeExpectation(data.n)
        self.n_eval = 0
        # the profiled counts of the last evaluation: the Newton start of the next one
        # (successive points of a search are close; the optimum does not depend on it)
        self._c_last: np.ndarray | None = None

    @property
    def dim(self) -> int:
        """Length of the unconstrained vector (DFE parameters, then logit ε if free)."""
        return self.model.n_free + (1 if self.free_eps else 0)

    def bounds(self) -> list[tuple[float, float]]:
        """Bounds of the unconstrained vector (ε in [1e−6, 0.5))."""
        b = self.model.bounds()
        if self.free_eps:
            b = b + [(-13.8, -0.01)]
        return b

    def split(self, x: np.ndarray) -> tuple[np.ndarray, float]:
        """DFE part and ε of an unconstrained vector."""
        x = np.asarray(x, dtype=float)
        if self.free_eps:
            return x[:-1], float(1.0 / (1.0 + np.exp(-x[-1])))
        return x, self.eps

    def evaluate(
        self, x: np.ndarray
    ) -> tuple[float, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``(loglik, c, lam_neutral, lam_selected, gbar)`` at ``x``."""
        xd, eps = self.split(x)
        dfe = self.model.to_dfe(xd)
        gbar = self.expect.mean_g(dfe)
        c, ln, ls = profile_counts(
            self.data, gbar, eps, self.equilibrium, self._c_last, self.neutral_g
        )
        if self.free_eps and np.all(np.isfinite(c)) and np.all(c > 0):
            self._c_last = c
        ll = poisson_loglik(self.data.neutral, ln) + poisson_loglik(self.data.selected, ls)
        return ll, c, ln, ls, gbar

    def __call__(self, x: np.ndarray) -> float:
        self.n_eval += 1
        try:
            ll = self.evaluate(x)[0]
        except (FloatingPointError, ValueError, ZeroDivisionError):
            return 1e300
        return -ll if np.isfinite(ll) else 1e300

    def value_and_grad(self, x: np.ndarray) -> tuple[float, np.ndarray]:
        r"""The objective (as :meth:`__call__`) and its analytic gradient at ``x``.

        By the envelope theorem the gradient of the profile log-likelihood is the partial
        derivative of the full Poisson log-likelihood at the profiled counts c (their own
        derivative multiplies a zero score): :math:`\sum (x/\lambda - 1)\,
        \partial\lambda/\partial x` over the entries of both classes, with
        :math:`\partial\lambda^S/\partial x` from the derivative of the DFE-averaged
        spectrum (:meth:`~driftband.prf.dfe.DfeExpectation.mean_g_grad`, chained through
        :meth:`~driftband.fit.models.DfeModel.dfe_jacobian`) and, for a free ε, the
        derivatives of both classes' misoriented expectations. Infeasible points give
        ``(1e300, 0)``.

        Parameters
        ----------
        x : ndarray, shape (dim,)

        Returns
        -------
        (float, ndarray of shape (dim,))
        """
        self.n_eval += 1
        x = np.asarray(x, dtype=float)
        bad = (1e300, np.zeros(x.size))
        try:
            ll, c, ln, ls, gbar = self.evaluate(x)
            if not np.isfinite(ll):
                return bad
            grad = self._loglik_grad(x, c, ln, ls, gbar)
        except (FloatingPointError, ValueError, ZeroDivisionError):
            return bad
        if not np.all(np.isfinite(grad)):
            return bad
        return -ll, -grad

    def gradient(self, x: np.ndarray) -> np.ndarray:
        """The analytic gradient of the objective at ``x`` (see :meth:`value_and_grad`).

        Parameters
        ----------
        x : ndarray, shape (dim,)

        Returns
        -------
        ndarray, shape (dim,)
            NaN where the objective is infeasible.
        """
        f, g = self.value_and_grad(x)
        return g if f < 1e299 else np.full(np.size(x), np.nan)

    def _loglik_grad(
        self, x: np.ndarray, c: np.ndarray, ln: np.ndarray, ls: np.ndarray, gbar: np.ndarray
    ) -> np.ndarray:
        """∂ log L/∂x at the profiled counts ``c`` (expectations ``ln``, ``ls``; ``gbar``
        the DFE-averaged spectrum at ``x``)."""
        xd, eps = self.split(x)
        data = self.data
        dfe = self.model.to_dfe(xd)
        # d gbar / d x: (n_free, n−1), then on the data's classes, times L_S
        dg = self.model.dfe_jacobian(xd).T @ self.expect.mean_g_grad(dfe)
        db = _fold(data, data.sites_selected * dg)
        with np.errstate(divide="ignore", invalid="ignore"):
            rs = np.where(ls > 0, data.selected / ls, 0.0) - 1.0
        if eps:
            dls = (1.0 - eps) * c * db + eps * c[::-1] * db[:, ::-1]
        else:
            dls = c * db
        out = dls @ rs
        if not self.free_eps:
            return out
        a = data.sites_neutral * _neutral_shape(data.n, self.neutral_g)
        b = data.sites_selected * gbar
        with np.errstate(divide="ignore", invalid="ignore"):
            rn = np.where(ln > 0, data.neutral / ln, 0.0) - 1.0
        rc = c[::-1]
        d_eps = (rn @ (rc * a[::-1] - c * a)) + (rs @ (rc * b[::-1] - c * b))
        return np.append(out, d_eps * eps * (1.0 - eps))
