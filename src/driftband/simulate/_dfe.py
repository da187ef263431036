"""Distributions of fitness effects for the forward simulator: parsing and sampling.

The simulator's own small samplers (numpy only), independent of the fitting code. A DFE is
given on the scaled axis S = 4·N_ref·s of a reference population size N_ref; the
simulator turns each draw into the selection coefficient s = S / (4·N_ref), so every
population of a study shares one distribution of s and its S scales with its own N.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..exceptions import OptionError

__all__ = ["S_MIN_CLIP", "SimDFE", "band_shares", "parse_beneficial", "parse_dfe", "s_from_S"]

#: Lower bound of the selection coefficient: the homozygote fitness 1 + 2s stays >= 0.
S_MIN_CLIP = -0.5

_FAMILIES: dict[str, tuple[str, ...]] = {
    "gamma": ("shape", "mean"),
    "lognormal": ("mu", "sigma"),
    "fixed": ("S",),
    "neutral": (),
}


@dataclass(frozen=True)
class SimDFE:
    """A DFE on S = 4·N_ref·s (deleterious S < 0), optionally with a beneficial point mass.

    Parameters
    ----------
    family : {"gamma", "lognormal", "fixed", "neutral"}
        ``gamma``: −S ~ Gamma(shape, mean) (mean of −S; scale = mean/shape).
        ``lognormal``: −S = exp(X), X ~ Normal(mu, sigma) (natural log).
        ``fixed``: every mutation has the same S (any sign). ``neutral``: S = 0.
    params : dict of str to float
        The family's parameters (see above).
    beneficial_p : float
        Probability that a new selected-class mutation is beneficial instead, in [0, 1].
    beneficial_S : float
        Its S (> 0) on the same reference scale.
    """

    family: str
    params: dict[str, float] = field(default_factory=dict)
    beneficial_p: float = 0.0
    beneficial_S: float = 0.0

    def __post_init__(self) -> None:
        if self.family not in _FAMILIES:
            raise OptionError(
                f"--true-dfe: unknown family {self.family!r} (use one of {', '.join(_FAMILIES)})"
            )
        need = set(_FAMILIES[self.family])
        have = set(self.params)
        if have != need:
            missing, extra = sorted(need - have), sorted(have - need)
            what = (
                (f"missing {', '.join(missing)}" if missing else "")
                + ("; " if missing and extra else "")
                + (f"unknown {', '.join(extra)}" if extra else "")
            )
            expected = ", ".join(k + "=" for k in _FAMILIES[self.family]) or "no parameters"
            raise OptionError(f"--true-dfe {self.family}: {what} (expected {expected})")
        p = self.params
        for k, v in p.items():
            if not math.isfinite(v):
                raise OptionError(f"--true-dfe {self.family}: {k}={v} is not a finite number")
        if self.family == "gamma" and (p["shape"] <= 0 or p["mean"] <= 0):
            raise OptionError("--true-dfe gamma: shape and mean (of -S) must be > 0")
        if self.family == "lognormal" and p["sigma"] < 0:
            raise OptionError("--true-dfe lognormal: sigma must be >= 0")
        if not 0.0 <= self.beneficial_p <= 1.0:
            raise OptionError(f"--true-beneficial: p={self.beneficial_p} must be in [0, 1]")
        if self.beneficial_p > 0 and not (
            self.beneficial_S > 0 and math.isfinite(self.beneficial_S)
        ):
            raise OptionError(
                f"--true-beneficial: S={self.beneficial_S} must be a finite number > 0"
            )

    def sample_S(self, size: int, rng: np.random.Generator) -> np.ndarray:
        """Draw scaled coefficients S on the reference scale.

        Parameters
        ----------
        size : int
            Number of new mutations.
        rng : numpy.random.Generator

        Returns
        -------
        ndarray of float64, shape (size,)
        """
        p = self.params
        if self.family == "gamma":
            S = -rng.gamma(p["shape"], p["mean"] / p["shape"], size)
        elif self.family == "lognormal":
            S = -np.exp(rng.normal(p["mu"], p["sigma"], size))
        elif self.family == "fixed":
            S = np.full(size, p["S"], dtype=float)
        else:
            S = np.zeros(size)
        if self.beneficial_p > 0 and size:
            ben = rng.random(size) < self.beneficial_p
            S[ben] = self.beneficial_S
        return S

    def mean_S(self) -> float:
        """Mean of S on the reference scale (before clipping of s)."""
        p = self.params
        if self.family == "gamma":
            m = -p["mean"]
        elif self.family == "lognormal":
            m = -math.exp(p["mu"] + p["sigma"] ** 2 / 2)
        elif self.family == "fixed":
            m = p["S"]
        else:
            m = 0.0
        return (1 - self.beneficial_p) * m + self.beneficial_p * self.beneficial_S

    def scaled(self, factor: float) -> dict[str, Any]:
        """The same distribution of s on another population's S axis (S multiplied by factor).

        Returns a plain dict (``family``, parameters, beneficial part) describing the DFE of
        S' = factor·S, e.g. ``factor = N_pop / N_ref``. Gamma: mean scales, shape stays;
        lognormal: mu += ln(factor); fixed and beneficial S scale.
        """
        p = dict(self.params)
        if self.family == "gamma":
            p["mean"] *= factor
        elif self.family == "lognormal":
            p["mu"] += math.log(factor)
        elif self.family == "fixed":
            p["S"] *= factor
        out: dict[str, Any] = {"family": self.family, **p}
        if self.beneficial_p > 0:
            out["beneficial_p"] = self.beneficial_p
            out["beneficial_S"] = self.beneficial_S * factor
        return out

    def describe(self) -> dict[str, Any]:
        """Plain-dict description on the reference scale (for provenance)."""
        return self.scaled(1.0)


def _parse_params(text: str, option: str) -> dict[str, float]:
    out: dict[str, float] = {}
    if not text.strip():
        return out
    for item in text.split(","):
        if "=" not in item:
            raise OptionError(f"{option}: expected KEY=VALUE, got {item!r}")
        k, v = (x.strip() for x in item.split("=", 1))
        if k in out:
            raise OptionError(f"{option}: {k} given twice")
        try:
            out[k] = float(v)
        except ValueError:
            raise OptionError(f"{option}: {k}={v!r} is not a number") from None
    return out


def parse_dfe(text: str, beneficial: str | None = None) -> SimDFE:
    """Parse ``--true-dfe FAMILY:KEY=VALUE,...`` (and ``--true-beneficial p=P,S=S``).

    Examples
    --------
    >>> parse_dfe("gamma:shape=0.3,mean=200").params
    {'shape': 0.3, 'mean': 200.0}
    >>> parse_dfe("fixed:S=-10", "p=0.01,S=50").beneficial_S
    50.0
    """
    fam, _, rest = text.partition(":")
    fam = fam.strip().lower()
    params = _parse_params(rest, f"--true-dfe {fam}")
    bp, bS = parse_beneficial(beneficial) if beneficial else (0.0, 0.0)
    return SimDFE(fam, params, bp, bS)


def parse_beneficial(text: str) -> tuple[float, float]:
    """Parse ``--true-beneficial p=P,S=S`` into ``(p, S)``."""
    d = _parse_params(text, "--true-beneficial")
    if set(d) != {"p", "S"}:
        raise OptionError(
            f"--true-beneficial expects p=PROBABILITY,S=SCALED_COEFFICIENT, got {text!r}"
        )
    return d["p"], d["S"]


def s_from_S(S: np.ndarray, n_ref: float) -> np.ndarray:
    """Selection coefficients s = S / (4·N_ref), clipped below at −0.5.

    Parameters
    ----------
    S : ndarray of float
        Scaled coefficients on the reference scale.
    n_ref : float
        Reference population size (diploid individuals).

    Returns
    -------
    ndarray of float64
        Same shape; homozygote fitness 1 + 2s >= 0 everywhere.
    """
    return np.maximum(np.asarray(S, dtype=float) / (4.0 * n_ref), S_MIN_CLIP)


def band_shares(
    dfe: SimDFE,
    n_ref: float,
    n_pop: float,
    edges: tuple[float, ...] = (0.0, 1.0, 10.0, 100.0, math.inf),
) -> list[float]:
    """True shares of new selected-class mutations in bands of |N_pop·s|.

    The simulator's s = max(S / (4·N_ref), −0.5) is put on the axis |N_pop·s| of a
    population of size ``n_pop`` (e.g. its present size) and binned with ``edges``
    (lower edge inclusive). Computed from the DFE's distribution function (scipy), with
    the clipping of s and the beneficial point mass taken into account.

    Returns
    -------
    list of float
        One share per band; they add up to 1.
    """
    from scipy import stats

    p = dfe.params
    cap = n_pop * -S_MIN_CLIP  # |N s| of a clipped mutation

    def cdf_del(x: float) -> float:  # P(|N_pop s| < x) for the deleterious part
        if x > cap:
            return 1.0
        t = 4.0 * n_ref * x / n_pop  # the same threshold on |S_ref|
        if dfe.family == "gamma":
            return float(stats.gamma.cdf(t, p["shape"], scale=p["mean"] / p["shape"]))
        if dfe.family == "lognormal":
            if p["sigma"] == 0:
                return float(t > math.exp(p["mu"]))
            return float(stats.lognorm.cdf(t, p["sigma"], scale=math.exp(p["mu"])))
        raise ValueError(dfe.family)  # point masses are handled below

    def point_band(v: float) -> int:
        return int(np.searchsorted(np.asarray(edges), v, side="right") - 1)

    nb = len(edges) - 1
    shares = np.zeros(nb)
    if dfe.family in ("gamma", "lognormal"):
        cdf = [cdf_del(e) if math.isfinite(e) else 1.0 for e in edges]
        shares += np.diff(cdf)
    else:
        S = p.get("S", 0.0)
        v = abs(S) * n_pop / (4.0 * n_ref)
        if S < 0:
            v = min(v, cap)
        shares[min(point_band(v), nb - 1)] += 1.0
    shares *= 1.0 - dfe.beneficial_p
    if dfe.beneficial_p > 0:
        vb = dfe.beneficial_S * n_pop / (4.0 * n_ref)
        shares[min(point_band(vb), nb - 1)] += dfe.beneficial_p
    return [float(x) for x in shares]
