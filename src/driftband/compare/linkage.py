"""Likelihood-ratio tests adjusted for linked sites (composite-likelihood theory; no I/O).

The Poisson likelihood of a spectrum treats every site as independent. Linked sites share
genealogies, so the log-likelihood is a composite likelihood: its maximiser is still
consistent, but the curvature of the log-likelihood (the sensitivity H) overstates the
information in the data, and the likelihood-ratio statistic W of a test of q constraints
no longer follows χ²(q). Its limit is Σ λ_j χ²₁, where the λ_j are the eigenvalues of
(H^ψψ)⁻¹ G^ψψ: H^ψψ is the block of H⁻¹ for the tested quantities ψ and G^ψψ the same
block of the inverse Godambe information G⁻¹ = H⁻¹ J H⁻¹, the true covariance of the
estimate (Kent 1982; Varin, Reid & Firth 2011, sec. 4.2). With independent sites every
λ_j = 1.

H⁻¹ comes from the numerical Hessian of each population's profile log-likelihood at its
estimate, and J from the genomic-block bootstrap: the covariance over replicates of the
score of each replicate's data at the point estimate (the blocks carry the linkage; the
replicates are paired across the populations of one dataset, so the covariance between
populations is kept). Each replicate then contributes the one-step estimate −H⁻¹u_r, whose
covariance is G⁻¹ = H⁻¹JH⁻¹; fit files without scores use the refitted estimates instead
(noisier where the likelihood is flat). The statistic is then
referred to c·χ²(ν) with c = Σλ²/Σλ and ν = (Σλ)²/Σλ², the second-order (Satterthwaite)
form of the Rao & Scott (1981) correction: W/c is compared with χ²(ν). Coffman et al.
(2016) apply the same Godambe adjustment to spectrum-based inference.

The reported adjustment floors every λ_j at 1. Linked sites are positively correlated
copies of each other's information: they cannot make the composite likelihood more
informative than the same number of independent sites, so the true λ_j are ≥ 1 (Varin,
Reid & Firth 2011, sec. 2.3 and 4.2; the first-order factor λ̄ of Rao & Scott 1981, 1984
is a design effect, ≥ 1 under positive intra-cluster correlation). Estimates below 1 are
the sampling error of a covariance from a few hundred replicates (on linked simulations
they ranged 0.56–1.37, below 1 in most cases) and would make the adjusted p smaller than
the raw one. The estimated eigenvalues stay available (``raw_eigenvalues``).

The test quantities ψ are differences of the two populations' DFE vectors on the
optimiser's unconstrained scale (log shape, log mean, ...); a null that leaves some
directions free (the Ne ratio of the "only Ne differs" test with the ratio fitted) projects
them out. Coordinates on a bound of either population's fit have no usable curvature and
are left out of the adjustment (the note says which).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..fit.likelihood import Objective
from ..fit.models import DfeModel, at_bound
from ..fit.optimize import central_hessian
from ..fit.results import ModelBootstrap

__all__ = [
    "MIN_PAIRED_REPLICATES",
    "LinkageAdjustment",
    "interior_coordinates",
    "linkage_adjustment",
    "naive_covariance",
    "replicate_vectors",
]

#: Fewest paired bootstrap replicates that estimate the covariance of the tested
#: differences (per tested coordinate, at least five times as many).
MIN_PAIRED_REPLICATES = 20


@dataclass
class LinkageAdjustment:
    """The eigenvalues of a composite-likelihood ratio test and the χ² they imply.

    Attributes
    ----------
    eigenvalues : ndarray
        λ_j, one per tested direction (1 each for independent sites), floored at 1 unless
        the adjustment was made with ``floor=False``.
    factor : float
        c = Σλ²/Σλ; the adjusted statistic is W/c.
    df : float
        ν = (Σλ)²/Σλ², the degrees of freedom of the adjusted statistic.
    replicates : int
        Paired bootstrap replicates used.
    coordinates : tuple of int
        The DFE coordinates used (the others are on a bound).
    raw_eigenvalues : ndarray
        The estimated λ_j before the floor (the same as ``eigenvalues`` without it).
    """

    eigenvalues: np.ndarray
    factor: float
    df: float
    replicates: int
    coordinates: tuple[int, ...]
    raw_eigenvalues: np.ndarray

    @property
    def floored(self) -> bool:
        """Whether the floor at 1 raised any estimated eigenvalue."""
        return bool(np.any(self.raw_eigenvalues < self.eigenvalues))

    @property
    def mean(self) -> float:
        """λ̄, the first-order (Rao & Scott 1981) factor."""
        return float(np.mean(self.eigenvalues))


def replicate_vectors(mb: ModelBootstrap, model: DfeModel) -> np.ndarray:
    """Each bootstrap replicate's DFE estimate as the optimiser's unconstrained vector.

    Parameters
    ----------
    mb : ModelBootstrap
    model : DfeModel

    Returns
    -------
    ndarray, shape (B, n_free)
        NaN rows for replicates that do not count (failed or not converged).
    """
    B = mb.shares.shape[0]
    out = np.full((B, model.n_free), np.nan)
    ok = mb.ok
    for r in range(B):
        if ok[r]:
            out[r] = model.from_natural({p: float(v[r]) for p, v in mb.params.items()})
    return out


def _kept(obj: Objective, x: np.ndarray) -> list[int]:
    """Coordinates of ``x`` on no bound (:func:`interior_coordinates` for the DFE part)."""
    k = obj.model.n_free
    inner = set(interior_coordinates(obj.model, x[:k]))
    return [
        j
        for j, b in enumerate(obj.bounds())
        if at_bound(float(x[j]), b) is None and (j >= k or j in inner)
    ]


def _inverse_information(obj: Objective, x: np.ndarray, keep: list[int]) -> np.ndarray | None:
    """H⁻¹ over the ``keep`` coordinates (the others held at their values)."""
    keep_a = np.array(keep)

    def sub(v: np.ndarray) -> float:
        y = x.copy()
        y[keep_a] = v
        return obj(y)

    H = central_hessian(sub, x[keep_a])
    if not np.all(np.isfinite(H)):
        return None
    try:
        np.linalg.cholesky(H)
        return np.linalg.inv(H)
    except np.linalg.LinAlgError:
        return None


def naive_covariance(
    obj: Objective, x: np.ndarray, score: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray | None] | None:
    """H⁻¹ for the DFE coordinates, and the one-step estimates of the replicates.

    H is the numerical Hessian of the profile negative log-likelihood over the coordinates
    of ``x`` that lie on no bound (:func:`interior_coordinates`; a misorientation rate on
    its bound is held there, as the fit does). With the replicates' scores u_r (gradients
    at ``x``), each replicate's estimate moves by −H⁻¹u_r (one Newton step), so that the
    covariance of these moves is H⁻¹JH⁻¹, the Godambe covariance, without the noise of
    refits in flat directions.

    Parameters
    ----------
    obj : Objective
    x : ndarray
        The estimate (unconstrained; DFE vector, then logit ε when free).
    score : ndarray, shape (B, dim), optional
        The replicates' scores (:attr:`ModelBootstrap.score`).

    Returns
    -------
    (ndarray, ndarray or None) or None
        H⁻¹'s DFE block, shape (n_free, n_free), NaN in the rows and columns of
        coordinates on a bound; the replicates' moves of the DFE vector, shape
        (B, n_free), NaN likewise (None without ``score``). None when the Hessian is not
        finite or not positive definite.
    """
    x = np.asarray(x, dtype=float)
    k = obj.model.n_free
    keep = _kept(obj, x)
    cov = np.full((k, k), np.nan)
    moves = None if score is None else np.full((np.shape(score)[0], k), np.nan)
    if not keep:
        return cov, moves
    hinv = _inverse_information(obj, x, keep)
    if hinv is None:
        return None
    dfe = [i for i, j in enumerate(keep) if j < k]
    idx = np.array(keep)[dfe]
    cov[np.ix_(idx, idx)] = hinv[np.ix_(dfe, dfe)]
    if moves is not None and score is not None:
        u = np.asarray(score, dtype=float)
        if u.ndim == 2 and u.shape[1] == obj.dim:
            moves[:, idx] = -(u[:, keep] @ hinv.T)[:, dfe]
        else:
            moves = None
    return cov, moves


def interior_coordinates(model: DfeModel, *xs: np.ndarray) -> list[int]:
    """The DFE coordinates that lie on no bound in any of the vectors ``xs``.

    A band mass of the discrete family at 0 removes its own coordinate (the log ratio to
    the first mass), the first mass at 0 every mass coordinate.

    Examples
    --------
    >>> m = DfeModel("gamma")
    >>> interior_coordinates(m, np.log([0.3, 200.0]), np.log([100.0, 50.0]))
    [1]
    """
    k = model.n_free
    drop: set[int] = set()
    n_base = k - (2 if model.beneficial else 0)
    for x in xs:
        for name, _side, _b in model.at_bounds(np.asarray(x, dtype=float)[:k]):
            if name == "mass_0":
                drop.update(range(n_base))
            elif name.startswith("mass_"):
                drop.add(int(name.split("_")[1]) - 1)
            else:
                drop.add(model.param_names.index(name) - (len(model.param_names) - k))
    return [j for j in range(k) if j not in drop]


def linkage_adjustment(
    c_naive: np.ndarray,
    draws: np.ndarray,
    coordinates: list[int],
    free: np.ndarray | None = None,
    floor: bool = True,
) -> LinkageAdjustment | None:
    """Eigenvalues of a composite likelihood-ratio test and the implied c·χ²(ν).

    Parameters
    ----------
    c_naive : ndarray, shape (k, k)
        H^ψψ: the covariance of the tested differences ψ implied by the Poisson
        likelihood (for two populations, the sum of their naive covariances).
    draws : ndarray, shape (B, k)
        ψ in each bootstrap replicate (NaN rows left out); their covariance estimates
        G^ψψ.
    coordinates : list of int
        The coordinates to use (the others are on a bound).
    free : ndarray, shape (k,), optional
        A direction that the null leaves free (its value is fitted under the null); it is
        projected out, and one eigenvalue fewer is kept.
    floor : bool
        Floor every eigenvalue at 1 before c and ν are formed (the default; see the
        module's docstring for why). ``False`` gives the estimated eigenvalues as they are.

    Returns
    -------
    LinkageAdjustment or None
        None without enough finite replicates (:data:`MIN_PAIRED_REPLICATES`, and five
        per coordinate) or coordinates, or when the covariances are not usable.

    Examples
    --------
    Draws whose covariance is twice the naive one give λ = 2 in each direction:

    >>> rng = np.random.default_rng(1)
    >>> d = rng.standard_normal((4000, 2)) * np.sqrt(2.0)
    >>> adj = linkage_adjustment(np.eye(2), d, [0, 1])
    >>> round(adj.factor, 1), round(adj.df, 1)
    (2.0, 2.0)

    Draws with half the naive covariance are floored at λ = 1 (the unadjusted test):

    >>> half = linkage_adjustment(np.eye(2), d / 2, [0, 1])
    >>> half.factor, half.df, half.floored
    (1.0, 2.0, True)
    """
    ii = list(coordinates)
    q = len(ii) - (1 if free is not None else 0)
    if q < 1:
        return None
    d = np.asarray(draws, dtype=float)[:, ii]
    d = d[np.all(np.isfinite(d), axis=1)]
    if d.shape[0] < max(MIN_PAIRED_REPLICATES, 5 * len(ii)):
        return None
    g = np.atleast_2d(np.cov(d, rowvar=False))
    h = np.asarray(c_naive, dtype=float)[np.ix_(ii, ii)]
    try:
        hinv = np.linalg.inv(h)
    except np.linalg.LinAlgError:
        return None
    if not (np.all(np.isfinite(hinv)) and np.all(np.isfinite(g))):
        return None
    P = hinv
    if free is not None:
        v = np.asarray(free, dtype=float)[ii]
        if not np.any(v):
            return None
        hv = hinv @ v
        P = hinv - np.outer(hv, hv) / float(v @ hv)
    # P·G has q non-zero eigenvalues (P has rank q); both are symmetric and P is
    # positive semi-definite, so they are real and non-negative.
    raw = np.sort(np.clip(np.linalg.eigvals(P @ g).real, 0.0, None))[::-1][:q]
    if not (float(raw.sum()) > 0 and np.all(np.isfinite(raw))):
        return None
    lam = np.maximum(raw, 1.0) if floor else raw
    s1, s2 = float(lam.sum()), float(np.sum(lam**2))
    return LinkageAdjustment(lam, s2 / s1, s1 * s1 / s2, int(d.shape[0]), tuple(ii), raw)
