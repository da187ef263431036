"""Number formatting and the fixed texts of the report (conventions, cautions).

Everything here returns plain text; the HTML writer escapes it and the Markdown writer
escapes it its own way, so both outputs carry the same words and numbers.
"""

from __future__ import annotations

import math
from typing import Any, TypeGuard

from ..effect import DEFAULT_EFFECT, S_PER_NES

MINUS = "\u2212"
NA = "n/a"

#: Okabe & Ito (2008) colour-blind-safe palette, in the order used for populations
#: (black last); see https://jfly.uni-koeln.de/color/ (from memory).
OKABE_ITO = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#F0E442", "#000000")
#: Hatches that repeat the population distinction without colour.
HATCHES = ("", "//", "..", "xx", "\\\\", "oo", "--", "++")

ALPHA_LEVEL = 0.05  # the usual 5 % level for the plain-words verdicts (common practice)


def is_num(v: Any) -> TypeGuard[float]:
    """True for a finite int or float (not bool); narrows ``v`` to a number for mypy."""
    return isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v)


def _minus(s: str) -> str:
    return s.replace("-", MINUS) if s.startswith("-") else s


def fnum(v: Any, digits: int = 3) -> str:
    """Fixed-point number with ``digits`` decimals (``n/a`` when missing)."""
    if not is_num(v):
        return "inf" if v == math.inf else NA
    return _minus(f"{v:.{digits}f}")


def fsig(v: Any, sig: int = 4) -> str:
    """Number with ``sig`` significant digits (parameters, diversity per site)."""
    if not is_num(v):
        return NA
    if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e6):
        m, e = f"{v:.{sig - 1}e}".split("e")
        return _minus(f"{m}e{int(e)}").replace("e-", "e" + MINUS)
    return _minus(f"{v:.{sig}g}")


def fint(v: Any) -> str:
    """Whole number with thin grouping (counts)."""
    if not is_num(v):
        return NA
    return f"{int(round(v)):,}".replace(",", "\u2009")


def fp(p: Any) -> str:
    """A p-value: two decimals from 0.1, two significant digits down to 0.001, then
    scientific (so that 0.0488 reads 0.049, not 0.05)."""
    if not is_num(p):
        return NA
    if p >= 0.1:
        return f"{p:.2f}"
    if p >= 0.001:
        return f"{p:.2g}"
    if p < 1e-16:
        return "< 1e" + MINUS + "16"
    return fsig(p, 2)


def frange(lo: Any, hi: Any, digits: int = 3) -> str:
    """An interval ``lo–hi`` (``lo to hi`` when a bound is negative)."""
    if not (is_num(lo) and is_num(hi)):
        return NA
    sep = " to " if (lo < 0 or hi < 0) else "\u2013"
    return f"{fnum(lo, digits)}{sep}{fnum(hi, digits)}"


def frange_sig(lo: Any, hi: Any, sig: int = 4) -> str:
    """An interval with significant digits (parameters of any magnitude)."""
    if not (is_num(lo) and is_num(hi)):
        return NA
    sep = " to " if (lo < 0 or hi < 0) else "\u2013"
    return f"{fsig(lo, sig)}{sep}{fsig(hi, sig)}"


def digits_for(*values: Any) -> int:
    """Decimals for a sentence: 2, or 3 when some value is small (|x| < 0.05)."""
    small = [abs(v) for v in values if is_num(v) and v != 0]
    return 3 if small and min(small) < 0.05 else 2


def band_label(lo: float, hi: float, scale: float = 1.0) -> str:
    """``0–1``, ``10–100`` or ``≥100`` (``scale`` 4 gives the |S| edges)."""
    if not is_num(hi):
        return f"\u2265{lo * scale:g}"
    return f"{lo * scale:g}\u2013{hi * scale:g}"


def pct(level: Any) -> str:
    """Confidence level as ``95 %``."""
    return f"{100 * level:g} %" if is_num(level) else "95 %"


def conventions(effect: str = DEFAULT_EFFECT) -> list[str]:
    """The report's list of conventions, for the effect convention ``effect`` of the bands."""
    k = S_PER_NES[effect]
    if effect == "homozygote":
        fitness = (
            "Genotype fitnesses are 1 : 1+s/2 : 1+s (semidominant; s is the homozygote "
            "effect, as in some published tables), so S = 2\u00b7Ne\u00b7s."
        )
    else:
        fitness = (
            "Genotype fitnesses are 1 : 1+s : 1+2s (semidominant: the heterozygote effect "
            "is s), so S = 4\u00b7Ne\u00b7s."
        )
    return [
        fitness,
        "S is the scaled selection coefficient of Poisson random field theory (4\u00b7Ne "
        "times the heterozygote effect); deleterious mutations have S < 0. The fixation "
        "probability of a new mutation relative to a neutral one is about "
        "S/(1 \u2212 e^(\u2212S)) (Kimura 1962).",
        f"Band edges are on |Ne\u00b7s| (= |S|/{k:g}); the first band, |Ne\u00b7s| < 1 "
        f"(|S| < {k:g}) with the default edges, is the effectively neutral one: there drift "
        "outweighs selection.",
        "Shares are of new mutations at selected-class sites, not of polymorphisms or "
        "substitutions; they sum to 1 over the bands.",
        "Intervals are percentile intervals of a block bootstrap over genomic blocks "
        "(blocks resampled with replacement, every model refitted); for the averaged "
        "shares, of every family's replicates weighted by that replicate's Akaike weights "
        "(the bootstrap form of the model-averaged tail-area interval, Turek & Fletcher "
        "2012).",
        "Expected spectra come from Poisson random field theory (Sawyer & Hartl 1992) with "
        "demographic nuisance factors r_i shared by both classes (Eyre-Walker, Woolfit & "
        "Phelps 2006); Pearson residuals are (observed \u2212 expected)/\u221aexpected.",
        "Models are ranked by AIC; Akaike weights are exp(\u2212\u0394AIC/2), normalised.",
    ]


#: When folded spectra are the right choice and what they lose (the README's "Folded or
#: unfolded?" says the same).
FOLDED_NOTE = (
    "Folded spectra (minor-allele counts) need no ancestral allele: use them when no "
    "reliable ancestral state is available (no INFO/AA, outgroup or ancestral sequence, "
    "or only a distant or poorly aligned one). What is lost: the n//2+1 folded entries "
    "carry less information than the n+1 unfolded ones, so intervals are wider; entry n, "
    "the divergence counts, and with them the McDonald\u2013Kreitman table, \u03b1 and "
    "\u03c9_a; the misorientation rate \u03b5; and a beneficial class, which folding "
    "confounds with deleterious mutations at low frequency. The deleterious DFE and the "
    "effectively neutral share are still estimated."
)

#: The same, in short, beside a population with folded spectra.
FOLDED_SHORT = (
    "Folded spectra: no divergence counts (no McDonald\u2013Kreitman table, \u03b1 or "
    "\u03c9_a), no misorientation rate and no beneficial class; see 'Folded or unfolded' "
    "under Cautions."
)

#: The flag of a population whose spectra assumed every class site without a record to
#: be callable (a variants-only VCF without a callable-sites BED).
VARIANTS_ONLY_FLAG = (
    "The VCF looks variants-only (no monomorphic record at the class sites) and no "
    "callable-sites BED was given: every class site without a record was counted as a "
    "callable monomorphic site, which inflates the callable sites and biases \u03b8 and "
    "the DFE wherever coverage was patchy. Recount the spectra with a callable-sites BED "
    "(--callable) or from an all-sites VCF, or state --all-sites-callable if every class "
    "site was in fact callable."
)

#: The flag of a population whose spectra came from an all-sites VCF with gaps (records
#: at fewer than 90 % of the class sites) without a callable-sites BED.
SPARSE_FLAG = (
    "The VCF holds monomorphic records, but not at every class site, and no callable-sites "
    "BED was given: the class sites without a record were counted as callable "
    "monomorphic sites. If they were not callable, the callable sites are inflated and "
    "\u03b8 and the DFE are biased; recount with a callable-sites BED (--callable)."
)

CAUTIONS = [
    (
        "Demographic misspecification",
        "The nuisance factors absorb distortions of the spectra by changes in population "
        "size, structure and sampling only approximately. Strong bottlenecks, expansions, "
        "admixture or hidden structure can still shift the fitted DFE, and with it the "
        "effectively neutral share.",
    ),
    (
        "Linked selection and background selection",
        "Selection at linked sites lowers the local Ne and distorts the neutral (4-fold) "
        "spectrum unevenly along the genome. The method assumes that neutral and selected "
        "sites share one genealogical history; where they do not, estimates are biased.",
    ),
    (
        "GC-biased gene conversion",
        "gBGC favours G/C over A/T alleles like weak selection, at neutral and selected sites "
        "alike. It can make 4-fold sites look non-neutral and bias the DFE and \u03b1.",
    ),
    (
        "Ancestral misidentification",
        "Unfolded spectra rest on the ancestral allele being right. Misidentified sites "
        "appear as high-frequency derived variants and can mimic positive selection; the "
        "misorientation rate \u03b5 is fitted (or fixed) and shown with the parameters. "
        "Folded spectra avoid this but carry less information.",
    ),
    ("Folded or unfolded", FOLDED_NOTE),
    (
        "Callable sites",
        "Class sites without a VCF record count as callable monomorphic sites. That holds "
        "for an all-sites VCF or inside a callable-sites BED; with a variants-only VCF and "
        "no such BED it holds only if every site was callable (see the warnings).",
    ),
    (
        "Sample size and number of blocks",
        "Few sampled gene copies resolve weakly selected mutations poorly, and bootstrap "
        "intervals from few genomic blocks (fewer than about 20) are unreliable; blocks "
        "should be longer than the extent of linkage disequilibrium.",
    ),
    (
        "Decisions",
        "These estimates alone are no basis for conservation or management decisions. They "
        "rest on the model assumptions above; have them reviewed by experts on the species' "
        "biology and demography, together with other evidence, before acting on them.",
    ),
]

#: One line per α estimate of the report's α table, in plain words.
ALPHA_EXPLAINED = (
    "\u03b1, classic: the share of selected-class substitutions that were adaptive, from "
    "the McDonald\u2013Kreitman counts alone; slightly deleterious polymorphisms bias it "
    "down.",
    "\u03b1, asymptotic: the same share read off at high derived frequencies, where "
    "slightly deleterious polymorphisms are rare.",
    "\u03b1, DFE-corrected: the share of substitutions beyond what the fitted deleterious "
    "and neutral mutations would fix by drift (beneficial mutations count as adaptive).",
    "\u03c9_a: the rate of those adaptive substitutions per selected site, relative to the "
    "neutral substitution rate.",
    "\u03b1 implied by the DFE: the share of substitutions that the fitted DFE's "
    "beneficial class would fix, from the polymorphism fit alone, without the divergence "
    "counts.",
)

#: Names, as written in prose, of the statsmodels multiple-testing methods.
ADJUST_NAMES = {
    "holm": "Holm",
    "bonferroni": "Bonferroni",
    "sidak": "Šidák",
    "holm-sidak": "Holm–Šidák",
    "simes-hochberg": "Hochberg",
    "hommel": "Hommel",
    "fdr_bh": "Benjamini–Hochberg",
    "fdr_by": "Benjamini–Yekutieli",
}


def adjust_name(method: str) -> str:
    """The prose name of a multiple-testing method (``holm`` -> ``Holm``)."""
    return ADJUST_NAMES.get(method.lower(), method)


PARAM_LABELS = {
    "shape": "shape \u03b2 of the gamma distribution of \u2212S",
    "mean_abs_S": "mean of \u2212S (mean |S| of deleterious mutations)",
    "mean_log_abs_S": "mean of ln(\u2212S) (median \u2212S = e^mean)",
    "sd_log_abs_S": "standard deviation of ln(\u2212S)",
    "beneficial_fraction": "share of beneficial new mutations",
    "beneficial_S": "S of beneficial mutations",
    "misorientation_rate": "ancestral misidentification rate \u03b5",
    "theta": "\u03b8 per site (neutral class, r\u2081 = 1)",
    "fixation_ratio": "mean fixation rate relative to neutral, r\u0304",
    "fixation_ratio_deleterious": "mean fixation rate of the deleterious part, r\u0304_del",
}


def param_label(name: str, edges: list[float] | None = None) -> str:
    """Readable description of a DFE parameter name from a fit file."""
    if name in PARAM_LABELS:
        return PARAM_LABELS[name]
    if name.startswith("mass_") and name[5:].isdigit() and edges:
        k = int(name[5:])
        e = list(edges) + [math.inf]
        if k + 1 < len(e):
            return f"mass in |Ne\u00b7s| band {band_label(e[k], e[k + 1])}"
    return name


#: Why the classic α of the McDonald–Kreitman table can be negative (shown beside α).
ALPHA_NEGATIVE_NOTE = (
    "The classic \u03b1 = 1 \u2212 D_S\u00b7P_N/(D_N\u00b7P_S) is negative when the "
    "selected class holds more polymorphism, relative to its divergence, than the neutral "
    "class. Slightly deleterious mutations do that: they segregate but rarely fix, so they "
    "inflate P_N without adding to D_N. A negative value is a downward-biased estimate, not "
    "a negative rate of adaptation; the asymptotic and the DFE-corrected \u03b1 remove most "
    "of that bias (Fay, Wyckoff & Wu 2001; Eyre-Walker & Keightley 2009)."
)

#: Full citations of the methods the tool uses (one home: the report and the README list
#: the same; tests/test_repo.py checks that the README holds every entry). From memory.
REFERENCES: list[str] = [
    "Akaike H (1974) A new look at the statistical model identification. IEEE Transactions "
    "on Automatic Control 19: 716\u2013723.",
    "Burnham KP, Anderson DR (2002) Model Selection and Multimodel Inference, 2nd edn. "
    "Springer, New York.",
    "Coffman AJ, Hsieh PH, Gravel S, Gutenkunst RN (2016) Computationally efficient "
    "composite likelihood statistics for demographic inference. Molecular Biology and "
    "Evolution 33: 591\u2013593.",
    "Efron B, Tibshirani RJ (1993) An Introduction to the Bootstrap. Chapman & Hall, New York.",
    "Eyre-Walker A, Keightley PD (2009) Estimating the rate of adaptive molecular evolution "
    "in the presence of slightly deleterious mutations and population size change. "
    "Molecular Biology and Evolution 26: 2097\u20132108.",
    "Eyre-Walker A, Woolfit M, Phelps T (2006) The distribution of fitness effects of new "
    "deleterious amino acid mutations in humans. Genetics 173: 891\u2013900.",
    "Fay JC, Wyckoff GJ, Wu C-I (2001) Positive and negative selection on the human genome. "
    "Genetics 158: 1227\u20131234.",
    "Hernandez RD, Williamson SH, Bustamante CD (2007) Context dependence, ancestral "
    "misidentification, and spurious signatures of natural selection. Molecular Biology "
    "and Evolution 24: 1792\u20131800.",
    "Holm S (1979) A simple sequentially rejective multiple test procedure. Scandinavian "
    "Journal of Statistics 6: 65\u201370.",
    "Kimura M (1962) On the probability of fixation of mutant genes in a population. "
    "Genetics 47: 713\u2013719.",
    "K\u00fcnsch HR (1989) The jackknife and the bootstrap for general stationary "
    "observations. Annals of Statistics 17: 1217\u20131241.",
    "Marth GT, Czabarka E, Murvai J, Sherry ST (2004) The allele frequency spectrum in "
    "genome-wide human variation data reveals signals of differential demographic history "
    "in three large world populations. Genetics 166: 351\u2013372.",
    "McDonald JH, Kreitman M (1991) Adaptive protein evolution at the Adh locus in "
    "Drosophila. Nature 351: 652\u2013654.",
    "Messer PW, Petrov DA (2013) Frequent adaptation and the McDonald\u2013Kreitman test. "
    "Proceedings of the National Academy of Sciences USA 110: 8615\u20138620.",
    "Sawyer SA, Hartl DL (1992) Population genetics of polymorphism and divergence. "
    "Genetics 132: 1161\u20131176.",
    "Self SG, Liang K-Y (1987) Asymptotic properties of maximum likelihood estimators and "
    "likelihood ratio tests under nonstandard conditions. Journal of the American "
    "Statistical Association 82: 605\u2013610.",
    "Smith NGC, Eyre-Walker A (2002) Adaptive protein evolution in Drosophila. Nature 415: "
    "1022\u20131024.",
    "Tajima F (1989) Statistical method for testing the neutral mutation hypothesis by DNA "
    "polymorphism. Genetics 123: 585\u2013595.",
    "Turek D, Fletcher D (2012) Model-averaged Wald confidence intervals. Computational "
    "Statistics & Data Analysis 56: 2809\u20132815.",
    "Varin C, Reid N, Firth D (2011) An overview of composite likelihood methods. "
    "Statistica Sinica 21: 5\u201342.",
]
