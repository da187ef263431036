"""DFE model specifications for the fit: parameters, transforms and starting points.

A :class:`DfeModel` maps an unconstrained vector (what the optimiser sees) to a DFE
object of :mod:`driftband.prf.families` and back. Transforms: log for positive parameters,
softmax for band masses, logit for probabilities.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..defaults import DEFAULT_EDGES_NES
from ..exceptions import OptionError
from ..prf.families import (
    DiscreteDfe,
    GammaDfe,
    LognormalDfe,
    WithBeneficial,
    discrete_family_edges,
)

if TYPE_CHECKING:
    from ..prf.dfe import BaseDfe, Dfe

__all__ = ["AT_BOUND_TOL", "FAMILIES", "MASS_TOL", "DfeModel", "at_bound", "parse_models"]

FAMILIES = ("gamma", "lognormal", "discrete")

# Bounds on the unconstrained scale keep the optimiser in a numerically sane region:
# shape in [0.01, 100], mean |S| in [1e-4, 1e7], lognormal sigma in [0.01, 30], S_b in
# [0.01, 1e4], p_b in [1e-6, 0.5].
_LOG = np.log

#: A coordinate lies at a bound when it is within this fraction of its bound interval
#: (on the unconstrained scale) of either end.
AT_BOUND_TOL = 1e-3
#: A band mass of the discrete family lies at its bound 0 below this (the softmax has no
#: bound per mass; 1e-6 of the mass's interval [0, 1]).
MASS_TOL = 1e-6


def _logit(p: float) -> float:
    return float(np.log(p) - np.log1p(-p))


def _expit(x: float) -> float:
    return float(1.0 / (1.0 + np.exp(-x)))


@dataclass(frozen=True)
class DfeModel:
    """One DFE family, optionally with a beneficial point mass.

    Parameters
    ----------
    family : {"gamma", "lognormal", "discrete"}
    beneficial : bool
        Add a fraction ``beneficial_fraction`` of beneficial mutations at ``S = beneficial_S > 0``.
    edges_nes : tuple of float
        The report's band edges on |Ne·s| (first edge 0); the discrete family's own bands
        are :attr:`family_edges`.
    """

    family: str
    beneficial: bool = False
    edges_nes: tuple[float, ...] = DEFAULT_EDGES_NES

    def __post_init__(self) -> None:
        if self.family not in FAMILIES:
            raise OptionError(
                f"unknown DFE family {self.family!r}; choose from {', '.join(FAMILIES)}"
            )

    @property
    def family_edges(self) -> tuple[float, ...]:
        """The discrete family's band edges on |Ne·s| (the report bands with the first one
        split, :func:`~driftband.prf.families.discrete_family_edges`)."""
        return discrete_family_edges(self.edges_nes)

    @property
    def name(self) -> str:
        """Model label, e.g. ``gamma`` or ``gamma+beneficial``."""
        return self.family + ("+beneficial" if self.beneficial else "")

    @property
    def param_names(self) -> tuple[str, ...]:
        """Names of the DFE parameters, in the order of the vector."""
        if self.family == "gamma":
            base: tuple[str, ...] = ("shape", "mean_abs_S")
        elif self.family == "lognormal":
            base = ("mean_log_abs_S", "sd_log_abs_S")
        else:
            base = tuple(f"mass_{k}" for k in range(len(self.family_edges)))
        return base + (("beneficial_fraction", "beneficial_S") if self.beneficial else ())

    @property
    def n_free(self) -> int:
        """Number of free DFE parameters (masses sum to one)."""
        k = 2 if self.family != "discrete" else len(self.family_edges) - 1
        return k + (2 if self.beneficial else 0)

    def bounds(self) -> list[tuple[float, float]]:
        """Bounds on the unconstrained vector."""
        if self.family == "gamma":
            b = [(_LOG(0.01), _LOG(100.0)), (_LOG(1e-4), _LOG(1e7))]
        elif self.family == "lognormal":
            b = [(-12.0, 20.0), (_LOG(0.01), _LOG(30.0))]
        else:
            b = [(-30.0, 30.0)] * (len(self.family_edges) - 1)
        if self.beneficial:
            b += [(_logit(1e-6), _logit(0.5)), (_LOG(0.01), _LOG(1e4))]
        return b

    def at_bounds(self, x: np.ndarray) -> list[tuple[str, str, float]]:
        """The DFE parameters of ``x`` that lie at a bound of :meth:`bounds`.

        A coordinate counts when it is within ``AT_BOUND_TOL`` of its bound interval of
        an end; a band mass of the discrete family when it is below ``MASS_TOL``.

        Parameters
        ----------
        x : ndarray, shape (n_free,)
            Unconstrained DFE vector.

        Returns
        -------
        list of (str, str, float)
            Natural-scale name, ``"lower"`` or ``"upper"``, and the bound on the natural
            scale, in the order of :attr:`param_names`.
        """
        x = np.asarray(x, dtype=float)
        nat = self.natural(x)
        out: list[tuple[str, str, float]] = []
        if self.family == "discrete":
            masses = [n for n in self.param_names if n.startswith("mass_")]
            out += [(n, "lower", 0.0) for n in masses if nat[n] < MASS_TOL]
            coords = list(range(self.n_free - 2, self.n_free)) if self.beneficial else []
            names = ["beneficial_fraction", "beneficial_S"] if self.beneficial else []
        else:
            coords = list(range(self.n_free))
            names = list(self.param_names)
        bounds = self.bounds()
        for j, name in zip(coords, names):
            side = at_bound(float(x[j]), bounds[j])
            if side is not None:
                xb = x.copy()
                xb[j] = bounds[j][0 if side == "lower" else 1]
                out.append((name, side, self.natural(xb)[name]))
        return out

    def to_dfe(self, x: np.ndarray) -> Dfe:
        """DFE object for an unconstrained vector ``x``."""
        x = np.asarray(x, dtype=float)
        k = self.n_free - (2 if self.beneficial else 0)
        base_x, ben_x = x[:k], x[k:]
        if self.family == "gamma":
            base: BaseDfe = GammaDfe(shape=float(np.exp(base_x[0])), mean=float(np.exp(base_x[1])))
        elif self.family == "lognormal":
            base = LognormalDfe(mu=float(base_x[0]), sigma=float(np.exp(base_x[1])))
        else:
            z = np.concatenate([[0.0], base_x])
            w = np.exp(z - z.max())
            base = DiscreteDfe(
                masses=tuple(float(v) for v in w / w.sum()), edges_nes=self.family_edges
            )
        if not self.beneficial:
            return base
        return WithBeneficial(base, p_b=_expit(ben_x[0]), s_b=float(np.exp(ben_x[1])))

    def dfe_jacobian(self, x: np.ndarray) -> np.ndarray:
        """Derivatives of the DFE object's parameters with respect to ``x``.

        Rows follow ``to_dfe(x).param_names`` (``shape, mean``; ``mu, sigma``; every band
        mass; then ``p_b, s_b``), columns the coordinates of ``x``: exp for the log
        transforms, the softmax Jacobian m_k (δ_kj − m_j) for the masses (the first
        mass's log ratio fixed at 0), p (1 − p) for the logit of ``p_b``.

        Parameters
        ----------
        x : ndarray, shape (n_free,)

        Returns
        -------
        ndarray, shape (len(to_dfe(x).param_names), n_free)

        Examples
        --------
        >>> np.round(DfeModel("gamma").dfe_jacobian(np.log([0.5, 20.0])), 12).tolist()
        [[0.5, 0.0], [0.0, 20.0]]
        """
        x = np.asarray(x, dtype=float)
        k = self.n_free - (2 if self.beneficial else 0)
        if self.family == "gamma":
            base = np.diag(np.exp(x[:2]))
        elif self.family == "lognormal":
            base = np.diag([1.0, float(np.exp(x[1]))])
        else:
            z = np.concatenate([[0.0], x[:k]])
            m = np.exp(z - z.max())
            m /= m.sum()
            base = (np.diag(m) - np.outer(m, m))[:, 1:]
        if not self.beneficial:
            return base
        p = _expit(float(x[k]))
        out = np.zeros((base.shape[0] + 2, self.n_free))
        out[: base.shape[0], :k] = base
        out[-2, k] = p * (1.0 - p)
        out[-1, k + 1] = float(np.exp(x[k + 1]))
        return out

    def natural(self, x: np.ndarray) -> dict[str, float]:
        """Natural-scale parameters (named) for an unconstrained vector."""
        d = self.to_dfe(x)
        # to_dfe makes the class of self.family, wrapped when self.beneficial
        base = d.base if isinstance(d, WithBeneficial) else d
        if isinstance(base, GammaDfe):
            vals = [base.shape, base.mean]
        elif isinstance(base, LognormalDfe):
            vals = [base.mu, base.sigma]
        else:
            vals = list(base.masses)
        if isinstance(d, WithBeneficial):
            vals += [d.p_b, d.s_b]
        return dict(zip(self.param_names, (float(v) for v in vals)))

    def from_natural(self, values: dict[str, float]) -> np.ndarray:
        """The unconstrained vector of natural-scale parameters (inverse of :meth:`natural`).

        Coordinates are clipped into :meth:`bounds` (a band mass of 0 maps to the lower
        bound of its log-ratio).

        Parameters
        ----------
        values : dict of str to float
            By the names of :attr:`param_names` (other keys are ignored).

        Returns
        -------
        ndarray, shape (n_free,)
            NaN where a value is missing or not finite.

        Examples
        --------
        >>> m = DfeModel("gamma")
        >>> x = m.from_natural({"shape": 0.3, "mean_abs_S": 200.0})
        >>> {k: round(v, 6) for k, v in m.natural(x).items()}
        {'shape': 0.3, 'mean_abs_S': 200.0}
        """
        nat = np.array([values.get(n, np.nan) for n in self.param_names], dtype=float)
        k = len(self.param_names) - (2 if self.beneficial else 0)
        base, ben = nat[:k], nat[k:]
        with np.errstate(divide="ignore", invalid="ignore"):
            if self.family == "gamma":
                x = list(np.log(base))
            elif self.family == "lognormal":
                x = [base[0], np.log(base[1])]
            else:
                x = list(np.log(base[1:]) - np.log(base[0]))
            if self.beneficial:
                x += [np.log(ben[0]) - np.log1p(-ben[0]), np.log(ben[1])]
        out = np.array(x, dtype=float)
        lo, hi = np.array(self.bounds()).T
        bad = np.isnan(out) | ~np.isfinite(nat).all()
        return np.where(bad, np.nan, np.clip(out, lo, hi))

    def starts(self) -> list[np.ndarray]:
        """Starting points of the multi-start search (unconstrained scale)."""
        if self.family == "gamma":
            base = [
                np.log([b, m])
                for b, m in itertools.product(
                    (0.15, 0.3, 0.6, 1.5), (2.0, 20.0, 200.0, 2000.0, 2e4)
                )
            ]
        elif self.family == "lognormal":
            base = [
                np.array([mu, np.log(sd)])
                for mu, sd in itertools.product((0.0, 2.0, 4.0, 6.0, 8.0), (0.5, 1.5, 3.0))
            ]
        else:
            k = len(self.family_edges) - 1
            base = [np.zeros(k)]
            for j in range(k):
                e = np.full(k, -1.0)
                e[j] = 1.5
                base.append(e)
        if not self.beneficial:
            return base
        ben = [np.array([_logit(0.01), np.log(10.0)]), np.array([_logit(0.05), np.log(100.0)])]
        return [np.concatenate([b, e]) for b in base for e in ben]


def at_bound(value: float, bound: tuple[float, float]) -> str | None:
    """``"lower"`` or ``"upper"`` when ``value`` is within ``AT_BOUND_TOL`` of the width
    of ``bound`` of that end, else None.

    Examples
    --------
    >>> at_bound(-13.79, (-13.8, -0.01)), at_bound(-5.0, (-13.8, -0.01))
    ('lower', None)
    """
    lo, hi = bound
    tol = AT_BOUND_TOL * (hi - lo)
    if value <= lo + tol:
        return "lower"
    if value >= hi - tol:
        return "upper"
    return None


def parse_models(
    spec: str, beneficial: bool = False, edges_nes: tuple[float, ...] = DEFAULT_EDGES_NES
) -> list[DfeModel]:
    """Parse ``--dfe gamma,lognormal,...`` (``NAME+beneficial`` adds one model each)."""
    out = []
    for tok in (t.strip() for t in spec.split(",")):
        if not tok:
            continue
        fam, _, extra = tok.partition("+")
        if extra not in ("", "beneficial"):
            raise OptionError(f"--dfe {tok!r}: only '+beneficial' may follow a family name")
        out.append(DfeModel(fam, bool(extra) or beneficial, tuple(edges_nes)))
    if not out:
        raise OptionError("--dfe names no model")
    return out
