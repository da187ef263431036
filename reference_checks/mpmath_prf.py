"""High-precision references for the Poisson-random-field core, computed with mpmath.

Everything here is deliberately slow and direct: the quantities are the defining integrals
evaluated by mpmath's adaptive tanh-sinh quadrature (``mpmath.quad``) at 30 significant
digits, with no use of driftband's own numerics. Double precision is used only to place
quadrature breakpoints (where the integrand has its bulk) and to rescale integrands so
that mpmath's absolute error control works for very small values.

Used by ``reference_checks/check_prf_mpmath.py`` and by the tests.

Sources of the integrals:

- Expected spectrum: Sawyer & Hartl (1992), equilibrium Poisson random field,
  E[xi_i]/(theta L) = C(n,i) int_0^1 x^(i-1) (1-x)^(n-i-1) (1 - e^{-S(1-x)})/(1 - e^{-S}) dx.
- Gamma DFE average: the same integral with the weight averaged over t = -S ~ Gamma(beta,
  rate lambda), w(x) = lambda^beta [zeta(beta, lambda + x) - zeta(beta, lambda + 1)]
  (Hurwitz zeta; digamma form at beta = 1). Derived here: expand
  (e^{t(1-x)} - 1)/(e^t - 1) = sum_{k>=0} (e^{-t(k+x)} - e^{-t(k+1)}) and average each
  term with the gamma Laplace transform E[e^{-ut}] = (1 + u/lambda)^-beta; checked against
  mpmath.quad over t of the hyp1f1 form of g_i (n = 6, beta = 0.5, mean 10: equal in
  double precision). The evaluation here is plain mpmath.
- Lognormal DFE average: quadrature over the normal variable of the spectrum, with the
  spectrum from mpmath's hyp1f1 (Kummer form, DLMF 13.2.39, from memory).

The DFE averages integrate vector-valued integrands (all classes at once) with mpmath's
Gauss-Legendre nodes on fixed subintervals, at two orders that must agree, which is
mpmath.quad's own error control made explicit.
"""

from __future__ import annotations

import functools
import math

import mpmath as mp
import numpy as np

DPS = 30


def _log_w_double(S: float, x: np.ndarray, one_minus_x: np.ndarray) -> np.ndarray:
    """log of (1 - e^{-S(1-x)})/(1 - e^{-S}) in double precision (breakpoints only)."""
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        if S == 0:
            return np.log(one_minus_x)
        if S > 0:
            return np.log(-np.expm1(-S * one_minus_x)) - math.log(-math.expm1(-S))
        t = -S
        # (e^{t(1-x)} - 1)/(e^t - 1) = e^{-tx} (1 - e^{-t(1-x)}) / (1 - e^{-t})
        return -t * x + np.log(-np.expm1(-t * one_minus_x)) - math.log(-math.expm1(-t))


def _breakpoints(logf: np.ndarray, y: np.ndarray, drops=(2, 10, 40, 90)) -> tuple:
    """Logit positions where the log-integrand has fallen by each drop from its maximum."""
    k = int(np.nanargmax(logf))
    top = logf[k]
    pts = {float(y[k])}
    for d in drops:
        left = np.flatnonzero(logf[:k] < top - d)
        if left.size:
            pts.add(float(y[left[-1]]))
        right = np.flatnonzero(logf[k:] < top - d)
        if right.size:
            pts.add(float(y[k + right[0]]))
    return sorted(pts), float(top)


def _logit_grid(n: int):
    y = np.linspace(-90.0, 70.0, 40001)
    lx = -np.logaddexp(0.0, -y)
    l1 = -np.logaddexp(0.0, y)
    return y, lx, l1


def _mp_expit(y: float) -> tuple:
    """(x, 1 - x) at working precision for logit y."""
    yy = mp.mpf(y)
    return 1 / (1 + mp.exp(-yy)), 1 / (1 + mp.exp(yy))


@functools.cache
def sfs_entry(n: int, i: int, S: float) -> tuple[float, float]:
    """Reference g_i(S) for one class: returns (value, natural log of value) as floats.

    The value may underflow to 0.0 in double precision; the log is always finite.
    """
    with mp.workdps(DPS):
        y, lx, l1 = _logit_grid(n)
        x = np.exp(lx)
        omx = np.exp(l1)
        # log of the x-integrand (not the y-integrand) on a dense logit grid
        logf = (i - 1) * lx + (n - i - 1) * l1 + _log_w_double(S, x, omx)
        ys, top = _breakpoints(logf, y)
        Smp = mp.mpf(S)
        logc = mp.log(mp.binomial(n, i))
        if S == 0:
            den = None
        else:
            den = mp.expm1(-Smp)

        def f(xx):
            omxx = 1 - xx
            if xx <= 0 or omxx <= 0:
                return mp.mpf(0)
            w = (1 - xx) if den is None else mp.expm1(-Smp * omxx) / den
            if w <= 0:
                return mp.mpf(0)
            return mp.exp((i - 1) * mp.log(xx) + (n - i - 1) * mp.log(omxx) + mp.log(w) - top)

        pts = [mp.mpf(0)] + [_mp_expit(v)[0] for v in ys] + [mp.mpf(1)]
        val = mp.quad(f, pts)
        logv = mp.log(val) + top + logc
        return float(mp.exp(logv)), float(logv)


def sfs(n: int, S: float, classes=None) -> tuple[np.ndarray, np.ndarray]:
    """Reference (values, logs) for the given classes (1-based; default all)."""
    classes = range(1, n) if classes is None else classes
    res = [sfs_entry(int(n), int(i), float(S)) for i in classes]
    return np.array([r[0] for r in res]), np.array([r[1] for r in res])


# ------------------------------------------------------------------- scipy second oracle
def kummer_scipy(n: int, S) -> np.ndarray:
    """g_i(S) from the closed form through scipy.special.hyp1f1, argument always -|S|.

    S > 0: n/(i(n-i)) [1 - M(n-i, n, -S)] / (1 - e^-S);
    S = -t < 0: n/(i(n-i)) [M(i, n, -t) - e^-t] / (1 - e^-t)
    (Euler's integral for M, DLMF 13.4.1, and Kummer's transformation, from memory).
    A second, double-precision oracle: it loses accuracy for |S| < 1e-2 (1 - M cancels).
    Shape ``np.shape(S) + (n - 1,)``; S must be non-zero.
    """
    from scipy.special import hyp1f1

    S = np.asarray(S, dtype=float)
    flat = S.reshape(-1)
    i = np.arange(1, n, dtype=float)
    c = n / (i * (n - i))
    out = np.empty((flat.size, n - 1))
    pos = flat > 0
    Sp = flat[pos][:, None]
    out[pos] = c * (1 - hyp1f1(n - i, n, -Sp)) / -np.expm1(-Sp)
    t = -flat[~pos][:, None]
    out[~pos] = c * (hyp1f1(i, n, -t) - np.exp(-t)) / -np.expm1(-t)
    return out.reshape(S.shape + (n - 1,))


# --------------------------------------------------------------------------- gamma DFE
class ReferenceNotConverged(RuntimeError):
    """Two quadrature orders disagree: the reference value cannot be trusted."""


def _gl_vector(F, intervals, degrees=(5, 6), rtol=1e-13):
    """Integrate a vector-valued F over the union of intervals with mpmath's
    Gauss-Legendre rules of two degrees (48 and 96 nodes per interval by default).

    F(x) returns a list of mpf. Raises ReferenceNotConverged if the two degrees disagree
    by more than ``rtol`` relative in any component. Returns the higher-degree result.
    """
    gl = mp.calculus.quadrature.GaussLegendre(mp.mp)
    results = []
    for d in degrees:
        nodes = gl.calc_nodes(d, mp.mp.prec)
        tot = None
        for a, b in intervals:
            a, b = mp.mpf(a), mp.mpf(b)
            half, mid = (b - a) / 2, (a + b) / 2
            for xn, wn in nodes:
                vals = F(mid + half * xn)
                wv = half * wn
                if tot is None:
                    tot = [wv * v for v in vals]
                else:
                    for k, v in enumerate(vals):
                        tot[k] += wv * v
        results.append(tot)
    lo, hi = results
    for k, (u, v) in enumerate(zip(lo, hi)):
        if abs(u - v) > rtol * abs(v):
            raise ReferenceNotConverged(f"component {k}: {u} vs {v}")
    return hi


def gamma_mean_sfs(n: int, shape: float, mean: float, degrees=(5, 6)) -> np.ndarray:
    """Reference gamma-DFE average of g_i, i = 1..n-1 (S = -t, t ~ Gamma(shape, mean)).

    C(n,i) int_0^1 x^(i-1)(1-x)^(n-i-1) wbar(x) dx with
    wbar(x) = lam^beta [zeta(beta, lam + x) - zeta(beta, lam + 1)], lam = beta / mean
    (digamma form lam [psi(lam + 1) - psi(lam + x)] at beta = 1), by mpmath Gauss-Legendre
    rules on fixed subintervals, checked by comparing two orders (to 1e-13). Results are
    cached per process (the tests and the quick check share them); a new array each call.
    """
    return np.array(_gamma_mean_sfs(int(n), float(shape), float(mean), tuple(degrees)))


@functools.cache
def _gamma_mean_sfs(n: int, shape: float, mean: float, degrees: tuple) -> tuple:
    with mp.workdps(DPS):
        beta = mp.mpf(shape)
        lam = beta / mp.mpf(mean)
        if shape == 1:
            psi1 = mp.digamma(lam + 1)

            def wbar(xx):
                return lam * (psi1 - mp.digamma(lam + xx))
        else:
            z1 = mp.zeta(beta, lam + 1)
            lb = lam**beta

            def wbar(xx):
                return lb * (mp.zeta(beta, lam + xx) - z1)

        # wbar changes on the scale lam near x = 0 (singularity at x = -lam): graded
        # intervals there, a few wide ones elsewhere.
        lamf = float(lam)
        pts = [0.0] + [lamf * 10.0**k for k in range(-1, 12) if lamf * 10.0**k < 0.05]
        pts += [0.05, 0.2, 0.4, 0.6, 0.8, 1.0]
        intervals = list(zip(pts[:-1], pts[1:]))
        logc = [mp.log(mp.binomial(n, i)) for i in range(1, n)]

        def F(xx):
            w = wbar(xx)
            lx, l1 = mp.log(xx), mp.log(1 - xx)
            return [mp.exp(logc[i - 1] + (i - 1) * lx + (n - i - 1) * l1) * w for i in range(1, n)]

        return tuple(float(v) for v in _gl_vector(F, intervals, degrees))


def gamma_band_shares(shape: float, mean: float, edges_nes=(0, 1, 10, 100)) -> np.ndarray:
    """Reference shares of Gamma(shape, mean) on t = |S| in |Ne s| = t/4 bands (mpmath)."""
    with mp.workdps(DPS):
        beta = mp.mpf(shape)
        lam = beta / mp.mpf(mean)
        edges = [mp.mpf(e) * 4 for e in edges_nes] + [mp.inf]
        return np.array(
            [
                float(mp.gammainc(beta, lam * a, lam * b, regularized=True))
                for a, b in zip(edges[:-1], edges[1:])
            ]
        )


def gamma_fixation_ratio(shape: float, mean: float) -> float:
    """Reference E[t/(e^t - 1)] for t ~ Gamma(shape, mean), by mpmath.quad.

    Uses u = t**shape (removes the t**(shape-1) endpoint singularity).
    """
    with mp.workdps(DPS):
        beta = mp.mpf(shape)
        lam = beta / mp.mpf(mean)
        c = lam**beta / mp.gamma(beta + 1)

        def f(u):
            if u == 0:
                return c
            t = u ** (1 / beta)
            return c * mp.exp(-lam * t) * t / mp.expm1(t)

        # bulk of u: t around 1/lam and around 1
        tmax = 80 / min(lam, 1)
        tpts = sorted({mp.mpf(v) for v in (1e-6, 1e-3, 0.1, 1, 10, 1 / lam, 10 / lam) if v < tmax})
        pts = [mp.mpf(0)] + [t**beta for t in tpts] + [tmax**beta, mp.inf]
        return float(mp.quad(f, pts))


# ----------------------------------------------------------------------- lognormal DFE
def lognormal_mean_sfs(n: int, mu: float, sigma: float, degrees=(5, 6)) -> np.ndarray:
    """Reference average of g_i(-t), ln t ~ Normal(mu, sigma), i = 1..n-1.

    int phi(z) g_i(-exp(mu + sigma z)) dz over |z| <= 12 (the rest has mass 4e-33), with
    g_i(-t) = n/(i(n-i)) [M(i, n, -t) - e^-t] / (1 - e^-t) from mpmath's hyp1f1 (Kummer's
    transformation of the closed form, DLMF 13.2.39, from memory) at 60 digits, by mpmath
    Gauss-Legendre rules on 24 unit intervals, checked by comparing two orders.
    """
    with mp.workdps(2 * DPS):
        m, s = mp.mpf(mu), mp.mpf(sigma)
        norm = 1 / mp.sqrt(2 * mp.pi)
        intervals = [(k, k + 1) for k in range(-12, 12)]

        def F(z):
            t = mp.exp(m + s * z)
            dens = norm * mp.exp(-z * z / 2)
            e = mp.exp(-t)
            den = -mp.expm1(-t)
            return [
                dens * mp.mpf(n) / (i * (n - i)) * (mp.hyp1f1(i, n, -t) - e) / den
                for i in range(1, n)
            ]

        return np.array([float(v) for v in _gl_vector(F, intervals, degrees, rtol=1e-12)])
