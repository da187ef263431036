"""Forward simulation of a study: populations of many unlinked sites, sampled into spectra.

Model (per population, each simulated independently):

* diploid Wright–Fisher population of N_t individuals (2N_t gene copies), with a
  piecewise-constant size history (see :mod:`._model`) after a burn-in at the ancestral
  size (default 10 × the ancestral size, in generations);
* two site classes, a selected one (``0fold``) and a neutral one (``4fold``), of L sites
  each; infinite sites: every new mutation lands on a site of its own class that has not
  mutated before;
* each generation: selection p' = p(1+s+sp)/(1+2sp) and binomial drift
  Binomial(2N_t, p') on every segregating mutation; mutations at 0 copies are dropped and
  those at 2N_t copies become substitutions (their generation is recorded); then
  Poisson(2·N_t·μ·L) new mutations per class enter at one copy (θ = 4·N·μ per site);
* selected-class mutations draw s from the DFE (given on S = 4·N_ref·s, clipped at
  s >= −0.5); neutral ones have s = 0;
* the start (before the burn-in) is a neutral equilibrium guess: Poisson(θL/j) mutations
  at j copies, j = 1..2N−1 (Fu 1995's neutral expectation), with s drawn from the DFE for
  the selected class; the burn-in then removes its imprint;
* at the end, n gene copies are sampled without replacement (hypergeometric).

Spectrum of a class: entry i (1 <= i < n) = sites with i derived copies in the sample;
entry n = sites where all n sampled copies are derived (segregating in the population but
fixed in the sample) plus substitutions that fixed in the last ``divergence_generations``
generations (the time since the split from an outgroup; older substitutions are shared
with the outgroup and so invisible); entry 0 = L minus the others.
"""

from __future__ import annotations

import logging
import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, cast

import numpy as np

from .._io import provenance
from ..exceptions import DriftbandWarning, OptionError
from ..spectra._types import ClassSpectrum, PopulationSpectra, SpectraSet
from ..spectra.io import add_diversity
from ._dfe import SimDFE, band_shares, s_from_S
from ._layout import GenomeLayout, make_layout
from ._model import PopulationModel
from ._wf import wf_generation

__all__ = [
    "CLASSES",
    "ClassVariants",
    "PopulationSample",
    "SimulatedStudy",
    "simulate_population",
    "simulate_study",
]

log = logging.getLogger("driftband")

#: Site classes of a simulated study: (selected, neutral).
CLASSES = ("0fold", "4fold")

#: Default band edges on |N·s| for the recorded truth.
_EDGES = (0.0, 1.0, 10.0, 100.0, math.inf)

Progress = Callable[[int, int], None]


@dataclass
class ClassVariants:
    """Sampled variable sites of one class of one population.

    Attributes
    ----------
    derived : ndarray of int64, shape (m,)
        Derived copies in the sample, 1..n (n also for substitutions).
    s : ndarray of float64, shape (m,)
        Selection coefficient of each site's derived allele.
    substitution : ndarray of bool, shape (m,)
        True for substitutions (fixed in the population within the divergence window).
    """

    derived: np.ndarray
    s: np.ndarray
    substitution: np.ndarray


@dataclass
class PopulationSample:
    """What the end of one population's simulation yields.

    Attributes
    ----------
    name : str
    n : int
        Sampled gene copies.
    classes : dict of str to ClassVariants
    truth : dict
        Realised counts (new mutations, fixations, segregating at the end, clipped s) and
        the parameters on this population's own scale.
    """

    name: str
    n: int
    classes: dict[str, ClassVariants]
    truth: dict[str, Any] = field(default_factory=dict)


@dataclass
class SimulatedStudy:
    """A simulated study: spectra plus everything needed to write it as a VCF.

    Attributes
    ----------
    spectra : SpectraSet
        One population per model, classes ``0fold`` and ``4fold``, per-block spectra,
        polarisation ``"aa"``, unfolded; provenance holds the simulation's truth.
    populations : list of PopulationModel
    samples : list of PopulationSample
    layout : GenomeLayout
    site_index : dict of str to list of ndarray
        Per class, per population: each variable site's index among the class's sites
        (genomic order; distinct across all populations).
    seed : int
        The seed actually used.
    """

    spectra: SpectraSet
    populations: list[PopulationModel]
    samples: list[PopulationSample]
    layout: GenomeLayout
    site_index: dict[str, list[np.ndarray]]
    seed: int


def _seed_stream(seed: int, *key: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence(entropy=seed, spawn_key=key))


def simulate_population(
    model: PopulationModel,
    dfe: SimDFE,
    mu: float,
    sites: dict[str, int],
    n_ref: float,
    burn_in: int,
    divergence_generations: int,
    rng: np.random.Generator,
    progress: Progress | None = None,
) -> PopulationSample:
    """Run one population forward and sample it.

    Parameters
    ----------
    model : PopulationModel
        Sample size and size history.
    dfe : SimDFE
        DFE of the selected class on S = 4·N_ref·s.
    mu : float
        Mutation rate per site per generation (θ = 4·N·μ).
    sites : dict of str to int
        Sites L per class; keys are :data:`CLASSES` (selected first).
    n_ref : float
        Reference size of the DFE's S axis.
    burn_in : int
        Generations at the ancestral size before the oldest size change.
    divergence_generations : int
        Substitutions fixed within this many generations before the sample enter
        entry n of the spectrum.
    rng : numpy.random.Generator
    progress : callable(done, total), optional
        Called now and then with generations done.

    Returns
    -------
    PopulationSample
    """
    sel_name, neu_name = CLASSES
    L = np.array([sites[sel_name], sites[neu_name]], dtype=float)
    total = int(burn_in) + model.history_generations
    T = int(divergence_generations)
    N0 = model.ancestral_size
    two_n_prev = 2 * N0
    n_new = np.zeros(2, np.int64)
    n_fixed = np.zeros(2, np.int64)
    n_clipped = 0

    def draw_s(k: int) -> np.ndarray:
        nonlocal n_clipped
        S = dfe.sample_S(k, rng)
        s = s_from_S(S, n_ref)
        n_clipped += int(np.count_nonzero(S / (4.0 * n_ref) < s))
        return s

    # Neutral equilibrium guess at the ancestral size: Poisson(theta L / j) at j copies.
    # State: derived copies of each segregating mutation, selected class (with its s)
    # and neutral class kept apart so that neutral sites skip the selection arithmetic.
    theta0 = 4.0 * N0 * mu
    j = np.arange(1, 2 * N0, dtype=np.int64)
    cnt_s = np.repeat(j, rng.poisson(theta0 * L[0] / j))
    sv = draw_s(cnt_s.size)
    cnt_n = np.repeat(j, rng.poisson(theta0 * L[1] / j))
    sub_s: list[np.ndarray] = []
    n_sub_neutral = 0
    # Size of each generation, by generations before the sample.
    sizes = np.array(
        [model.size_at(a) for a in range(model.history_generations + 1)], dtype=np.int64
    )
    step = max(1, total // 100)
    one = np.ones(0, np.int64)
    for g in range(total):
        ago = total - 1 - g
        two_n = 2 * int(sizes[min(ago, sizes.size - 1)])
        # Selected class: selection then drift.
        cnt_s = wf_generation(cnt_s, sv, two_n_prev, two_n, rng)
        fixed = cnt_s == two_n
        nf = int(np.count_nonzero(fixed))
        if nf:
            n_fixed[0] += nf
            if ago < T:
                sub_s.append(sv[fixed])
        keep = (cnt_s > 0) & ~fixed
        if not keep.all():
            cnt_s, sv = cnt_s[keep], sv[keep]
        # Neutral class: drift only (s = 0 leaves p unchanged exactly).
        cnt_n = rng.binomial(two_n, cnt_n / two_n_prev)
        nf = int(np.count_nonzero(cnt_n == two_n))
        if nf:
            n_fixed[1] += nf
            if ago < T:
                n_sub_neutral += nf
        keep = (cnt_n > 0) & (cnt_n < two_n)
        if not keep.all():
            cnt_n = cnt_n[keep]
        # New mutations, one copy each.
        k0, k4 = (int(x) for x in rng.poisson(two_n * mu * L))
        n_new += (k0, k4)
        if one.size < max(k0, k4):
            one = np.ones(2 * max(k0, k4), np.int64)
        cnt_s = np.concatenate([cnt_s, one[:k0]])
        sv = np.concatenate([sv, draw_s(k0)])
        cnt_n = np.concatenate([cnt_n, one[:k4]])
        two_n_prev = two_n
        if progress is not None and (g % step == 0 or g == total - 1):
            progress(g + 1, total)
    # Sample n of the 2N gene copies without replacement.
    n = model.n
    k_s = rng.hypergeometric(cnt_s, two_n_prev - cnt_s, n) if cnt_s.size else cnt_s
    k_n = rng.hypergeometric(cnt_n, two_n_prev - cnt_n, n) if cnt_n.size else cnt_n
    sub_s_all = np.concatenate(sub_s) if sub_s else np.empty(0)
    n_subs = (sub_s_all.size, n_sub_neutral)
    classes = {}
    for ci, (name, k, s_seg, s_sub) in enumerate(
        (
            (CLASSES[0], k_s, sv, sub_s_all),
            (CLASSES[1], k_n, np.zeros(cnt_n.size), np.zeros(n_sub_neutral)),
        )
    ):
        var = k > 0
        classes[name] = ClassVariants(
            derived=np.concatenate([k[var], np.full(n_subs[ci], n)]).astype(np.int64),
            s=np.concatenate([s_seg[var], s_sub]),
            substitution=np.concatenate(
                [np.zeros(int(var.sum()), bool), np.ones(n_subs[ci], bool)]
            ),
        )
    seg_end = (cnt_s.size, cnt_n.size)
    truth = {
        "generations": total,
        "burn_in": int(burn_in),
        "mu": mu,
        "theta_ancestral": 4.0 * N0 * mu,
        "theta_present": 4.0 * model.present_size * mu,
        "new_mutations": {CLASSES[i]: int(n_new[i]) for i in (0, 1)},
        "fixations": {CLASSES[i]: int(n_fixed[i]) for i in (0, 1)},
        "substitutions_in_window": {CLASSES[i]: int(n_subs[i]) for i in (0, 1)},
        "segregating_at_end": {CLASSES[i]: int(seg_end[i]) for i in (0, 1)},
        "clipped_s": n_clipped,
    }
    return PopulationSample(model.name, n, classes, truth)


def simulate_study(
    populations: Sequence[PopulationModel],
    dfe: SimDFE,
    theta: float = 0.01,
    sites: dict[str, int] | int = 100_000,
    blocks: int = 100,
    reference_size: float | None = None,
    burn_in: int | None = None,
    burn_in_factor: float = 10.0,
    divergence_generations: int = 0,
    seed: int | None = None,
    chromosomes: int = 4,
    gene_codons: int = 300,
    intergenic: int = 300,
    options: dict[str, Any] | None = None,
    progress: Callable[[str, int, int], None] | None = None,
) -> SimulatedStudy:
    """Simulate every population of a study and build its spectra.

    Parameters
    ----------
    populations : sequence of PopulationModel
        Simulated independently (own random stream each) with the same distribution of s.
    dfe : SimDFE
        Selected-class DFE on S = 4·N_ref·s.
    theta : float
        Per-site θ = 4·N_ref·μ at the reference size; μ = θ / (4·N_ref) is shared by
        every population and epoch (so θ scales with N), unless a population has its own
        ``theta`` (taken at its ancestral size).
    sites : int or dict of str to int
        Sites per class (one number for both, or ``{"0fold": L0, "4fold": L4}``).
    blocks : int
        Number of equal blocks K of each class (the bootstrap units).
    reference_size : float, optional
        N_ref of the DFE's S axis and of θ (default: the first population's ancestral
        size).
    burn_in : int, optional
        Generations at the ancestral size before the oldest size change, the same for
        every population (default: ``burn_in_factor`` × each population's ancestral
        size). Fewer than 10·N gives a warning.
    burn_in_factor : float
        See ``burn_in``.
    divergence_generations : int
        Window (generations before the sample) whose substitutions are counted in entry n.
    seed : int, optional
        Seed of every random stream (drawn at random and recorded if None).
    chromosomes : int
        Synthetic chromosomes of the layout.
    gene_codons, intergenic : int
        Layout: codons per gene (at most) and non-coding bases before each gene.
    options : dict, optional
        Recorded in the provenance.
    progress : callable(population, done, total), optional

    Returns
    -------
    SimulatedStudy

    Raises
    ------
    OptionError
        On impossible settings: no populations, fewer sites than blocks, a divergence
        window longer than the simulation, or θ·L too large for infinite sites.
    """
    pops = list(populations)
    if not pops:
        raise OptionError("at least one population is required")
    if isinstance(sites, int | np.integer):
        sites = {c: int(sites) for c in CLASSES}
    sites = {c: int(sites[c]) for c in CLASSES}
    K = int(blocks)
    if K < 1:
        raise OptionError(f"--block-count {K}: need at least one block")
    for c, L in sites.items():
        if L < K:
            raise OptionError(
                f"--class-sites for {c}: {L} sites cannot fill {K} blocks "
                "(lower --block-count or raise --class-sites)"
            )
    if chromosomes < 1 or gene_codons < 1 or intergenic < 3:
        raise OptionError(
            "--chromosomes and --gene-codons must be >= 1 and --intergenic "
            ">= 3 (room for each gene's stop codon)"
        )
    if not (theta > 0 and math.isfinite(theta)):
        raise OptionError(f"--theta {theta}: must be a positive number")
    n_ref = float(reference_size) if reference_size is not None else float(pops[0].ancestral_size)
    if not n_ref > 0:
        raise OptionError(f"--reference-size {reference_size}: must be > 0")
    if divergence_generations < 0:
        raise OptionError("--divergence-generations must be >= 0")
    if seed is None:
        seed = int(cast(int, np.random.SeedSequence().entropy) % (2**63))
    seed = int(seed)
    if seed < 0:
        raise OptionError(f"--seed {seed}: must be >= 0")
    mu_shared = theta / (4.0 * n_ref)
    plan = []
    for p in pops:
        mu = p.theta / (4.0 * p.ancestral_size) if p.theta is not None else mu_shared
        b = (
            int(burn_in)
            if burn_in is not None
            else int(math.ceil(burn_in_factor * p.ancestral_size))
        )
        if b < 0:
            raise OptionError(f"--burn-in {b}: must be >= 0")
        if b < 10 * p.ancestral_size:
            warnings.warn(
                f"population {p.name!r}: burn-in of {b} generations is shorter "
                f"than 10N = {10 * p.ancestral_size}; its spectra may not have "
                "reached equilibrium",
                DriftbandWarning,
                stacklevel=2,
            )
        total = b + p.history_generations
        if divergence_generations > total:
            raise OptionError(
                f"--divergence-generations {divergence_generations} is longer "
                f"than population {p.name!r}'s simulation ({total} generations)"
            )
        max_theta = 4.0 * max(s for _, s in p.epochs) * mu
        plan.append((p, mu, b, max_theta))
    # Infinite sites: the sampled variable sites of all populations must fit in L.
    for c, L in sites.items():
        expect = sum(th * L * sum(1.0 / i for i in range(1, p.n)) for p, _, _, th in plan)
        if expect > 0.5 * L:
            raise OptionError(
                f"theta is too large for infinite sites: about {expect:.0f} "
                f"variable {c} sites expected among {L} (lower --theta)"
            )
    samples = []
    for i, (p, mu, b, _) in enumerate(plan):
        log.info(
            "simulating population %s: N=%d (ancestral %d), %d generations",
            p.name,
            p.present_size,
            p.ancestral_size,
            b + p.history_generations,
        )
        cb = None if progress is None else (lambda d, t, _n=p.name: progress(_n, d, t))
        samp = simulate_population(
            p, dfe, mu, sites, n_ref, b, divergence_generations, _seed_stream(seed, 0, i), cb
        )
        samp.truth["dfe_on_population_scale"] = {
            "present_size": dfe.scaled(p.present_size / n_ref),
            "ancestral_size": dfe.scaled(p.ancestral_size / n_ref),
        }
        samp.truth["nes_band_edges"] = [e if math.isfinite(e) else None for e in _EDGES]
        samp.truth["nes_band_shares"] = {
            "present_size": band_shares(dfe, n_ref, p.present_size, _EDGES),
            "ancestral_size": band_shares(dfe, n_ref, p.ancestral_size, _EDGES),
        }
        samples.append(samp)
    layout = make_layout(
        (sites[CLASSES[0]], sites[CLASSES[1]]),
        K,
        chromosomes,
        CLASSES,
        gene_codons=gene_codons,
        spacer=intergenic,
    )
    # Distinct sites for the variable sites of all populations, per class.
    srng = _seed_stream(seed, 1)
    site_index: dict[str, list[np.ndarray]] = {}
    for c in CLASSES:
        counts = [s.classes[c].derived.size for s in samples]
        m = sum(counts)
        if m > sites[c]:
            raise OptionError(
                f"{m} variable {c} sites do not fit in {sites[c]} sites "
                "(infinite sites; lower --theta or raise --class-sites)"
            )
        idx = srng.choice(sites[c], size=m, replace=False).astype(np.int64)
        site_index[c] = np.split(idx, np.cumsum(counts)[:-1])
    pops_out = {}
    for pi, (p, samp) in enumerate(zip(pops, samples)):
        n = p.n
        classes = {}
        for ci, c in enumerate(CLASSES):
            blk = layout.block_of(ci, site_index[c][pi])
            flat = (
                np.bincount(blk * (n + 1) + samp.classes[c].derived, minlength=K * (n + 1))
                .reshape(K, n + 1)
                .astype(np.int64)
            )
            flat[:, 0] = layout.block_sites[:, ci] - flat[:, 1:].sum(axis=1)
            classes[c] = ClassSpectrum(flat, layout.block_sites[:, ci].copy())
        ps = PopulationSpectra(p.name, n, False, classes, "aa")
        add_diversity(ps, neutral=CLASSES[1], selected=CLASSES[0])
        pops_out[p.name] = ps
    sim_info = {
        "model": "diploid Wright-Fisher, unlinked sites, infinite sites; fitnesses 1 : 1+s "
        ": 1+2s; S = 4 N s; history in generations before the sample",
        "seed": seed,
        "theta": theta,
        "reference_size": n_ref,
        "mutation_rate_shared": mu_shared,
        "sites": sites,
        "blocks": K,
        "divergence_generations": int(divergence_generations),
        "dfe": dfe.describe(),
        "s_clip_min": -0.5,
        "populations": {p.name: {**p.describe(), **samp.truth} for p, samp in zip(pops, samples)},
    }
    prov = provenance(options or {})
    prov["simulation"] = sim_info
    ss = SpectraSet(pops_out, layout.blocks(), {}, prov)
    return SimulatedStudy(ss, pops, samples, layout, site_index, seed)
