"""Forward Wright–Fisher simulation of studies (``driftband simulate``).

The simulator is the truth the fit is validated against, so it is written from the model
itself, with no diffusion mathematics: a diploid population of N individuals, genotype
fitnesses 1 : 1+s : 1+2s (S = 4Ns), many unlinked biallelic sites (infinite sites), new
mutations at a Poisson rate, selection then binomial drift every generation, a
piecewise-constant size history after a burn-in, hypergeometric sampling at the end.
See :func:`simulate_study` for a whole study, :func:`write_study` for its files, and
:func:`simulate_fixation` / :func:`simulate_trajectories` for single-site experiments.
"""

from ._dfe import S_MIN_CLIP, SimDFE, band_shares, parse_beneficial, parse_dfe, s_from_S
from ._files import (
    check_genome_option,
    check_vcf_options,
    study_paths,
    write_study,
    write_study_vcf,
)
from ._genome import CODON_POSITION_CLASSES, PATTERN_CODONS, ReferenceGenome, build_reference
from ._layout import CODON_PATTERNS, GenomeLayout, codon_pattern_counts, make_layout
from ._model import PopulationModel, build_populations, parse_history, parse_population
from ._study import (
    CLASSES,
    ClassVariants,
    PopulationSample,
    SimulatedStudy,
    simulate_population,
    simulate_study,
)
from ._wf import (
    FixationResult,
    selection_step,
    simulate_fixation,
    simulate_trajectories,
    wf_generation,
)

__all__ = [
    "CLASSES",
    "CODON_PATTERNS",
    "CODON_POSITION_CLASSES",
    "PATTERN_CODONS",
    "S_MIN_CLIP",
    "ClassVariants",
    "FixationResult",
    "GenomeLayout",
    "PopulationModel",
    "PopulationSample",
    "ReferenceGenome",
    "SimDFE",
    "SimulatedStudy",
    "band_shares",
    "build_populations",
    "build_reference",
    "check_genome_option",
    "check_vcf_options",
    "codon_pattern_counts",
    "make_layout",
    "parse_beneficial",
    "parse_dfe",
    "parse_history",
    "parse_population",
    "s_from_S",
    "selection_step",
    "simulate_fixation",
    "simulate_population",
    "simulate_study",
    "simulate_trajectories",
    "study_paths",
    "wf_generation",
    "write_study",
    "write_study_vcf",
]
