"""Forward simulation of one population on a linked genome, for the linked-site benchmark.

Needs fwdpy11 (not a driftband dependency): ``pip install fwdpy11==0.24.7``.

One diploid Wright–Fisher population of ``N`` individuals on a genome of ``length`` bp
with uniform crossing over (``r`` per bp per generation). Every bp is one selected
(0fold) and one neutral (4fold) site, so the two classes are interleaved along the same
linked genome:

* selected mutations are simulated forward by fwdpy11 at rate ``mu`` per bp, with
  s ~ -Gamma(shape, mean = MEAN_S / (4 N_ref)). fwdpy11 gives genotype values
  1, 1 + h*e, 1 + scaling*e (``fwdpy11.Multiplicative`` docs, "Genetic values" page of the
  fwdpy11 documentation), multiplied over sites; with ``h = 1`` and ``scaling = 2`` this
  is fitness 1 : 1+s : 1+2s, s the heterozygote effect, S = 4Ns (driftband's convention);
* neutral mutations are added afterwards on the tree sequence (msprime.sim_mutations,
  infinite sites, binary alleles) at the same rate ``mu`` per bp.

After a burn-in of ``burnin`` generations at the ancestral size and an optional size
change, ``n`` gene copies (``n / 2`` individuals) are sampled. Per block the spectra are
unfolded (the ancestral state is known): entry i counts sites with i derived copies in
the sample, entry 0 includes the monomorphic sites, entry n the sites segregating in the
population but fixed in the sample (fixations in the whole population are not counted,
as in ``driftband simulate`` with ``--divergence-generations 0``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import demes
import fwdpy11
import msprime
import numpy as np


@dataclass(frozen=True)
class LinkedModel:
    """Parameters of one linked simulation (sizes diploid, rates per bp per generation)."""

    N: int  # ancestral (burn-in) size
    length: int
    blocks: int
    mu: float  # per bp per class
    r: float  # crossing over per bp
    shape: float
    mean_s: float  # mean |s| of the gamma (heterozygote effect)
    n: int = 20
    burnin: int | None = None  # default 10 N
    change_ago: int = 0  # generations before the sample of a size change
    new_size: int | None = None  # size after the change


def _graph(m: LinkedModel) -> demes.Graph:
    b = demes.Builder(time_units="generations")
    if m.new_size is None or m.change_ago <= 0:
        b.add_deme("pop", epochs=[{"start_size": m.N}])
    else:
        b.add_deme(
            "pop",
            epochs=[
                {"start_size": m.N, "end_time": m.change_ago},
                {"start_size": m.new_size},
            ],
        )
    return b.resolve()


def simulate_linked(m: LinkedModel, seed: int) -> dict[str, Any]:
    """Simulate one population; return its block spectra and diversity summaries.

    Returns
    -------
    dict
        ``block_sfs`` (class -> int array (blocks, n+1)), ``block_sites`` (int array),
        ``pi_neutral`` (mean pairwise diversity per bp of the neutral class in the whole
        population), ``pi_sample`` (the same in the sample), ``seconds`` of the forward
        simulation.
    """
    import time

    t0 = time.perf_counter()
    L = float(m.length)
    burnin = 10 * m.N if m.burnin is None else m.burnin
    demog = fwdpy11.ForwardDemesGraph.from_demes(_graph(m), burnin=burnin, burnin_is_exact=True)
    pdict = {
        "nregions": [],
        "sregions": [fwdpy11.GammaS(0, L, 1.0, -m.mean_s, m.shape, h=1.0)],
        "recregions": [fwdpy11.PoissonInterval(0, L, m.r * L)],
        "rates": (0.0, m.mu * L, None),
        "gvalue": fwdpy11.Multiplicative(2.0),
        "demography": demog,
        "simlen": demog.final_generation,
        "prune_selected": True,
    }
    params = fwdpy11.ModelParams(**pdict)
    pop = fwdpy11.DiploidPopulation(m.N, L)
    rng = fwdpy11.GSLrng(seed)
    fwdpy11.evolvets(rng, pop, params, 100, suppress_table_indexing=True)
    t_fwd = time.perf_counter() - t0

    ts = pop.dump_tables_to_tskit()
    alive = np.asarray(ts.samples())
    gen = np.random.default_rng(seed)
    inds = gen.choice(alive.size // 2, m.n // 2, replace=False)
    sample_cols = np.sort(np.concatenate([2 * inds, 2 * inds + 1]))

    edges = np.linspace(0, L, m.blocks + 1)
    block_sites = np.diff(np.round(edges)).astype(np.int64)
    out: dict[str, Any] = {"block_sites": block_sites, "block_sfs": {}}

    def spectra(t) -> np.ndarray:
        pos = t.tables.sites.position
        sfs = np.zeros((m.blocks, m.n + 1), dtype=np.int64)
        if pos.size:
            g = t.genotype_matrix()
            g = (g > 0).astype(np.int32)
            tot = g.sum(axis=1)
            seg = (tot > 0) & (tot < alive.size)
            cnt = g[:, sample_cols].sum(axis=1)
            blk = np.clip(np.searchsorted(edges, pos, side="right") - 1, 0, m.blocks - 1)
            keep = seg & (cnt > 0)
            np.add.at(sfs, (blk[keep], cnt[keep]), 1)
        sfs[:, 0] = block_sites - sfs[:, 1:].sum(axis=1)
        return sfs

    out["block_sfs"]["0fold"] = spectra(ts)
    neutral = msprime.sim_mutations(
        ts.delete_sites(np.arange(ts.num_sites)),
        rate=m.mu,
        model=msprime.BinaryMutationModel(),
        discrete_genome=False,
        random_seed=seed,
        keep=False,
    )
    out["block_sfs"]["4fold"] = spectra(neutral)
    out["pi_neutral"] = float(neutral.diversity(mode="site") / 1.0)
    out["pi_sample"] = float(neutral.diversity(sample_sets=[alive[sample_cols]], mode="site")[0])
    out["pi_neutral_branch"] = float(neutral.diversity(mode="branch")) * m.mu
    out["seconds"] = time.perf_counter() - t0
    out["seconds_forward"] = t_fwd
    return out
