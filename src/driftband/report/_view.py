"""What the report shows, gathered from the documents (no statistics, no I/O).

:func:`collect` reads a fit document, comparison rows and spectra documents into plain
view objects; the HTML and Markdown writers render the same objects, so both show the
same numbers. Nothing here estimates anything: values are taken from the files, only
selected, labelled and put into words.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

from ..effect import DEFAULT_EFFECT, S_PER_NES, shown_edges
from ..exceptions import InputError
from ._inputs import check_compare_rows, check_fit_doc, check_spectra_doc
from ._text import (
    ALPHA_LEVEL,
    SPARSE_FLAG,
    VARIANTS_ONLY_FLAG,
    adjust_name,
    band_label,
    digits_for,
    fnum,
    fp,
    frange,
    fsig,
    is_num,
    pct,
)

__all__ = [
    "Band",
    "PairView",
    "PopulationView",
    "ReportView",
    "bound_flag",
    "collect",
    "comparison_guides",
]

RESIDUAL_FLAG = 3.0  # |Pearson residual| above which a class is pointed out


@dataclass
class Band:
    """One |Ne·s| band of one population's best model."""

    lo: float
    hi: float
    share: float | None
    ci_low: float | None
    ci_high: float | None
    #: |S| per unit of |Ne·s| under the fit's effect convention (:mod:`driftband.effect`)
    s_per_nes: float = S_PER_NES[DEFAULT_EFFECT]

    @property
    def label(self) -> str:
        """Band on |Ne·s| (in the fit's effect convention), e.g. ``0–1``."""
        return band_label(self.lo, self.hi)

    @property
    def label_s(self) -> str:
        """The same band on |S|, e.g. ``0–4``."""
        return band_label(self.lo, self.hi, self.s_per_nes)

    @property
    def hi_s(self) -> float:
        """The upper edge on |S|."""
        return self.hi * self.s_per_nes


@dataclass
class PopulationView:
    """One population: its record in the fit file and, if given, in a spectra file."""

    name: str
    anchor: str
    record: dict[str, Any]
    best: str
    bands: list[Band]
    level: float
    replicates: int | None
    blocks: float | None  # genomic blocks of the bootstrap (a whole number in our files)
    flags: list[str] = field(default_factory=list)
    spectra: dict[str, Any] | None = None
    spectra_source: str | None = None

    @property
    def dataset(self) -> str:
        """Dataset label of the population (may be empty)."""
        return str(self.record.get("dataset") or "")

    @property
    def best_fit(self) -> dict[str, Any]:
        """The record of the AIC-best model."""
        return self.record["models"][self.best]

    @property
    def headline(self) -> str:
        """``averaged`` or the model the headline shares come from."""
        return headline_model(self.record)

    @property
    def converged(self) -> bool:
        """Whether the best model's fit converged."""
        return bool(self.best_fit.get("success", False))

    @property
    def n(self) -> int:
        """Sampled gene copies."""
        return int(self.record["data"]["n"])

    @property
    def folded(self) -> bool:
        """Whether the spectra are folded."""
        return bool(self.record["data"].get("folded", False))

    def model_ci(self, model: str) -> dict[str, Any]:
        """The bootstrap record of a model (empty without bootstrap)."""
        return ((self.record.get("bootstrap") or {}).get("models") or {}).get(model) or {}


@dataclass
class PairView:
    """The comparison rows of one pair of populations, and their plain-words reading."""

    a: str
    b: str
    rows: list[dict[str, Any]]
    sentences: list[tuple[str, str]]  # (test, sentence)


@dataclass
class ReportView:
    """Everything the report shows."""

    options: dict[str, Any]
    neutral: str
    selected: str
    populations: list[PopulationView]
    pairs: list[PairView]
    compare_rows: list[dict[str, Any]] | None
    fit_provenance: dict[str, Any]
    spectra_docs: dict[str, dict[str, Any]]
    provenance: dict[str, Any]
    adjust_method: str
    adjust_known: bool

    @property
    def effect(self) -> str:
        """The effect convention of the band edges (:mod:`driftband.effect`)."""
        return str(self.options.get("effect", DEFAULT_EFFECT))

    @property
    def edges(self) -> list[float]:
        """Band edges of the first population (lower edges and the open top)."""
        return [b.lo for b in self.populations[0].bands] + [math.inf]

    @property
    def level(self) -> float:
        """Confidence level of the intervals."""
        return self.populations[0].level


def _anchor(k: int, name: str) -> str:
    return f"pop{k + 1}-" + (re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-") or "x")


def headline_model(p: dict[str, Any]) -> str:
    """``averaged`` or the model the headline shares come from."""
    return str((p.get("headline") or {}).get("model") or p["best_model"])


def _bands(p: dict[str, Any], effect: str) -> list[Band]:
    """The headline bands: the model-averaged shares where the fit file has them (schema
    2), else the AIC-best model's; edges on |Ne·s| under the convention ``effect``."""
    best = p["best_model"]
    f = p["models"][best]
    edges = list(shown_edges([float(e) for e in f["band_edges"]], effect)) + [math.inf]
    head = p.get("headline") or {}
    if head:
        shares, ci = head.get("shares") or [], head.get("shares_ci")
        if head.get("interval_reliable") is False:
            ci = None  # never shown as if it were an interval; the flags say why
    else:
        shares = f["shares"]
        ci = (((p.get("bootstrap") or {}).get("models") or {}).get(best) or {}).get("shares_ci")
    out = []
    for k, s in enumerate(shares):
        lo = hi = None
        if isinstance(ci, list) and k < len(ci) and isinstance(ci[k], list) and len(ci[k]) == 2:
            lo, hi = ci[k]
        out.append(
            Band(
                edges[k],
                edges[k + 1],
                s if is_num(s) else None,
                lo if is_num(lo) else None,
                hi if is_num(hi) else None,
                S_PER_NES[effect],
            )
        )
    return out


def _flags(name: str, p: dict[str, Any], blocks: float | None) -> list[str]:
    """Convergence and data warnings of one population, as sentences."""
    out = []
    best = p["best_model"]
    for m, f in p["models"].items():
        if not f.get("success", False):
            msg = str(f.get("message") or "no message")
            if m == best:
                out.append(
                    f"The best model {m} did not converge ({msg}); no fitted model "
                    "converged, so its numbers are unreliable."
                )
            else:
                out.append(f"Model {m} did not converge ({msg}); it is left out of the AIC choice.")
    for m, f in p["models"].items():
        names = dfe_at_bounds(f)
        if names:
            out.append(
                f"Model {m}: {', '.join(names)} at bound ({_bound_values(f, names)}); "
                "the data do not place "
                f"{'this parameter' if len(names) == 1 else 'these parameters'} inside "
                "the range the fit allows, so no standard error is shown and the band shares "
                "of this model rest on a limit of the fit."
            )
    se = p["models"][best].get("stderr") or {}
    unset = _no_wald(p["models"][best])
    missing = [k for k, v in se.items() if not is_num(v) and k not in unset]
    if missing:
        out.append(
            f"No asymptotic standard error for {', '.join(missing)} of the best model "
            f"{best} (the Hessian was not usable there); rely on the bootstrap "
            "interval."
        )
    boot = p.get("bootstrap") or {}
    if not boot:
        out.append(
            "No bootstrap: the shares have no confidence intervals (rerun "
            "'driftband fit' with --bootstrap B)."
        )
    else:
        reps = boot.get("replicates")
        for m, b in (boot.get("models") or {}).items():
            failed = b.get("failed") or 0
            if is_num(failed) and failed > 0:
                out.append(
                    f"{int(failed)} of {reps} bootstrap refits of model {m} failed or "
                    "did not converge."
                )
        if is_num(blocks) and blocks < 20:
            out.append(
                f"Only {int(blocks)} genomic blocks: bootstrap intervals from fewer "
                "than 20 blocks are unreliable."
            )
    for note in (p.get("headline") or {}).get("notes") or []:
        if "genomic blocks" in note and is_num(blocks) and blocks < 20:
            continue  # said above
        out.append(f"Headline: {note[0].upper()}{note[1:]}.")
    res = p["models"][best].get("pearson_residuals") or {}
    vals = [v for arr in res.values() if isinstance(arr, list) for v in arr if is_num(v)]
    big = [v for v in vals if abs(v) > RESIDUAL_FLAG]
    if big:
        out.append(
            f"{len(big)} of {len(vals)} spectrum classes have |Pearson residual| > "
            f"{RESIDUAL_FLAG:g} under {best}: check the residual plot; the model may "
            "not capture the shape of the spectra."
        )
    return out


def dfe_at_bounds(fit: dict[str, Any]) -> list[str]:
    """The DFE parameters of a model record that lie at a bound (``eps`` left out)."""
    return [str(n) for n in fit.get("at_bounds") or [] if n != "misorientation_rate"]


def _no_wald(fit: dict[str, Any]) -> set[str]:
    """Parameters of a model record without a Wald s.e. by design: at a bound, and
    ``beneficial_S`` when ``beneficial_fraction`` is at its bound (not identified)."""
    names = {str(n) for n in fit.get("at_bounds") or []}
    return names | ({"beneficial_S"} if "beneficial_fraction" in names else set())


def _bound_values(fit: dict[str, Any], names: list[str]) -> str:
    params = dict(fit.get("params") or {}, misorientation_rate=fit.get("misorientation_rate"))
    return ", ".join(f"{n} = {fsig(params.get(n))}" for n in names)


def bound_flag(fit: dict[str, Any]) -> str:
    """The flag of a headline share from a model with a DFE parameter at a bound.

    Parameters
    ----------
    fit : dict
        One model's record of a fit file (``populations[...]["models"][name]``).

    Returns
    -------
    str
        E.g. ``"sd_log_abs_S at bound: the share rests on a limit of the fit"``; empty when
        no DFE parameter of the model is at a bound (``eps`` at its bound is not
        flagged: it does not enter the DFE).
    """
    names = dfe_at_bounds(fit)
    if not names:
        return ""
    return f"{', '.join(names)} at bound: the share rests on a limit of the fit"


def _match_spectra(views: list[PopulationView], docs: dict[str, dict[str, Any]]) -> None:
    """Attach each population's spectra record (name, ``label/name`` or dataset match)."""
    for v in views:
        found: list[tuple[int, str, dict]] = []
        for key, doc in docs.items():
            for q, rec in doc["populations"].items():
                if v.name == f"{key}/{q}":
                    found.append((0, key, rec))
                elif key == v.dataset and (v.name == q or v.name.endswith("/" + q)):
                    found.append((1, key, rec))
                elif v.name == q or (
                    "/" in v.name and v.name.split("/", 1)[1] == q and not v.dataset
                ):
                    found.append((2, key, rec))
        if not found:
            continue
        top = min(f[0] for f in found)
        best = [f for f in found if f[0] == top]
        if len(best) > 1:
            raise InputError(
                f"population {v.name!r} is in several spectra files "
                f"({', '.join(f[1] for f in best)}); give them as "
                "--spectra LABEL=FILE with the labels used by 'driftband fit'"
            )
        _, key, rec = best[0]
        if int(rec["n"]) != v.n or bool(rec.get("folded", False)) != v.folded:
            raise InputError(
                f"population {v.name!r}: the spectra file has n = {rec['n']} "
                f"({'folded' if rec.get('folded') else 'unfolded'}), the fit "
                f"has n = {v.n} ({'folded' if v.folded else 'unfolded'}); is it "
                "the spectra file the fit was made from?",
                key,
            )
        v.spectra, v.spectra_source = rec, key
    for key, doc in docs.items():
        if not any(v.spectra_source == key for v in views):
            raise InputError(
                f"none of its populations ({', '.join(doc['populations'])}) is "
                f"in the fit file (it holds {', '.join(v.name for v in views)})",
                key,
            )


def spectra_flags(doc: dict[str, Any]) -> list[str]:
    """Data warnings a spectra file records for its populations, as sentences.

    Parameters
    ----------
    doc : dict
        A spectra document (``driftband spectra`` output).

    Returns
    -------
    list of str
        The variants-only warning when its callable sites were assumed
        (``provenance.callable_sites.warning``), the warning of an all-sites VCF with
        gaps (``sparse``); empty otherwise.
    """
    cs = (doc.get("provenance") or {}).get("callable_sites") or {}
    if cs.get("warning"):
        return [VARIANTS_ONLY_FLAG]
    if cs.get("sparse") and cs.get("source") == "all_sites_vcf":
        return [SPARSE_FLAG]
    return []


def _share(pops: dict[str, PopulationView], name: str, model: str) -> float | None:
    v = pops.get(name)
    if v is None:
        return None
    if model == "averaged" and v.record.get("headline"):
        s = v.record["headline"]["shares"][0]
    elif model in v.record["models"]:
        s = v.record["models"][model]["shares"][0]
    else:
        return None
    return s if is_num(s) else None


def _p_text(r: dict[str, Any], method: str) -> str:
    parts = []
    rel = "\u2264" if str(r.get("p_at_floor") or "").lower() == "true" else "="
    if is_num(r.get("p_value")):
        parts.append(f"p {rel} {fp(r['p_value'])}")
    if is_num(r.get("p_adjusted")):
        parts.append(f"{method}-adjusted p {rel} {fp(r['p_adjusted'])}")
    if is_num(r.get("statistic_linkage")) and is_num(r.get("p_raw")):
        parts.append(
            f"p read off the statistic adjusted for linked sites (divided by "
            f"{fnum(r.get('linkage_factor'), 2)}); as if sites were unlinked p = "
            f"{fp(r['p_raw'])}"
        )
    elif is_num(r.get("p_raw")):
        parts.append("p not adjusted for linked sites (see the table's note)")
    return ", ".join(parts) if parts else "no p-value"


def _p_for_verdict(r: dict[str, Any]) -> float | None:
    p = r.get("p_adjusted")
    if not is_num(p):
        p = r.get("p_value")
    return p if is_num(p) else None


def _sentence_difference(
    r: dict[str, Any], pops: dict[str, PopulationView], method: str, level: float
) -> str:
    a, b, model = r["population_a"], r["population_b"], r["model"]
    d = r.get("estimate")
    sa, sb = _share(pops, a, model), _share(pops, b, model)
    if is_num(sa) and is_num(sb) and not is_num(d):
        d = sb - sa
    if not is_num(d):
        return (
            f"{a} and {b}: no estimate of the difference in the effectively neutral "
            f"share ({r.get('note') or 'empty row'})."
        )
    lo, hi = r.get("ci_low"), r.get("ci_high")
    if d < 0:  # say it with the larger population first
        a, b, sa, sb, d = b, a, sb, sa, -d
        lo, hi = (-hi if is_num(hi) else None), (-lo if is_num(lo) else None)
    dig = digits_for(sa, sb, d, lo, hi)
    if d == 0:
        head = f"{b} and {a} carry the same effectively neutral share ({fnum(sb, dig)})"
    else:
        vs = f": {fnum(sb, dig)} vs {fnum(sa, dig)}" if is_num(sa) and is_num(sb) else ""
        head = (
            f"{b} carries a larger effectively neutral share than {a}{vs}, difference "
            f"{fnum(d, dig)}"
        )
    if is_num(lo) and is_num(hi):
        head += f" ({pct(level)} CI {frange(lo, hi, dig)})"
    p = _p_for_verdict(r)
    if p is None:
        return head + (
            f" ({model} model). There is no interval or p-value: "
            f"{r.get('note') or 'the fits have no bootstrap'}."
        )
    head += f", {_p_text(r, method)} ({model} model)."
    excl = is_num(lo) and is_num(hi) and (lo > 0 or hi < 0)
    sig = p < ALPHA_LEVEL
    if sig and (excl or not is_num(lo)):
        verdict = " The data support a difference at the 5 % level."
    elif not sig and not excl:
        verdict = " At the 5 % level the data do not show a clear difference."
    else:
        verdict = (
            " The interval and the p-value disagree at the 5 % level (few bootstrap "
            "replicates?); treat the difference as uncertain."
        )
    return head + verdict


def _sentence_shared(r: dict[str, Any], method: str) -> str:
    a, b, model = r["population_a"], r["population_b"], r["model"]
    stat, df = r.get("statistic"), r.get("df")
    p = _p_for_verdict(r)
    core = (
        f"One {model} DFE shared by {a} and {b} (each keeping its own \u03b8, "
        "demographic nuisance factors and misorientation rate) against separate DFEs: "
        f"likelihood-ratio statistic {fnum(stat, 2)}, df {fnum(df, 0)}, "
        f"{_p_text(r, method)}."
    )
    if p is None:
        return core
    if p < ALPHA_LEVEL:
        core += " The shared DFE is rejected at the 5 % level: the two DFEs differ."
    else:
        core += (
            " The shared DFE is not rejected at the 5 % level: the data are compatible "
            "with one DFE for both."
        )
    if is_num(r.get("estimate")):
        core += f" Under the shared DFE the effectively neutral share is {fnum(r['estimate'])}."
    return core


def _sentence_ne_only(r: dict[str, Any], pops: dict[str, PopulationView], method: str) -> str:
    a, b, model = r["population_a"], r["population_b"], r["model"]
    rho = r.get("ne_ratio") if is_num(r.get("ne_ratio")) else r.get("estimate")
    note = str(r.get("note") or "")
    free = r["test"] == "ne_only_free_lrt"
    pred, obs = r.get("predicted_share_b"), r.get("observed_share_b")
    if not is_num(obs):
        obs = _share(pops, b, model)
    dig = digits_for(pred, obs)
    if free:
        how = (
            f"fitted with the shape of the DFE shared and its scale free: Ne({b})/Ne({a}) "
            f"= {fnum(rho, 2)}"
            + (
                f" (from neutral diversity π: {fnum(r.get('ne_ratio_pi'), 2)})"
                if is_num(r.get("ne_ratio_pi"))
                else ""
            )
        )
        head = "Only Ne differs (ratio fitted; the version to read)?"
    else:
        assumption = (
            note.split("assuming ", 1)[1].split(";", 1)[0]
            if "assuming " in note
            else "equal mutation rates unless relative rates were given"
        )
        how = (
            f"with Ne({b})/Ne({a}) = {fnum(rho, 2)} from the ratio of diversity π at "
            f"neutral sites, assuming {assumption}"
        )
        head = "Only Ne differs (ratio from π)?"
    text = (
        f"{head} If {a} and {b} shared one distribution of s and differed only in Ne, "
        f"{how}, the effectively neutral share of {b} would be {fnum(pred, dig)}; "
        f"observed {fnum(obs, dig)}. Likelihood-ratio test of this constraint against "
        f"separate DFEs: statistic {fnum(r.get('statistic'), 2)}, df "
        f"{fnum(r.get('df'), 0)}, {_p_text(r, method)}."
    )
    if str(r.get("out_of_equilibrium") or "").lower() == "true":
        text += (
            " Caution: a population looks out of equilibrium (see the table's note); both "
            "versions assume equilibrium, and the one with the ratio from π can reject "
            "a true null after a recent change of size."
        )
    p = _p_for_verdict(r)
    if p is None:
        return text
    if p < ALPHA_LEVEL:
        return text + (
            " Rejected at the 5 % level: a difference in Ne alone does not "
            "explain the two DFEs (the distributions of s may differ"
            + ("" if free else ", or the Ne ratio from π is not that of the DFE")
            + ")."
        )
    return text + (
        " Not rejected at the 5 % level: a difference in Ne alone is compatible with the data."
    )


NE_ONLY_GUIDE = (
    "Two versions of the 'only Ne differs' test are run. Read the one with the Ne ratio "
    "fitted: it asks only whether one DFE shape, stretched along S = 4Ne\u00b7s, fits both "
    "populations. The version with the ratio from neutral diversity \u03c0 adds the "
    "assumption that \u03c0 measures the same Ne as the DFE does (equal mutation rates, "
    "equilibrium, no more linked selection in one population than in the other). Both "
    "versions assume that the populations are at equilibrium: after a recent change of "
    "size both reject a true null once there are enough sites (with exact spectra of a "
    "four-fold decline 200 generations ago in a population of 400, at 10 million sites "
    "per class), so where a population is flagged as out of equilibrium neither can be "
    "trusted as it is: refit with explicit size histories (--demography auto), under "
    "which both versions use each population's fitted history and its current size."
)


LINKAGE_GUIDE = (
    "The likelihood-ratio tests compare Poisson likelihoods that treat every site as "
    "independent. Sites close together on a chromosome share their history, so these "
    "statistics overstate the evidence. With a bootstrap over at least 20 genomic blocks "
    "each statistic is divided by a factor estimated from how much the blocks vary "
    "(composite-likelihood theory: Varin, Reid & Firth 2011; a Rao\u2013Scott-type "
    "correction), and its p-value is read off the adjusted statistic; a factor near 1 "
    "means the sites behave as if unlinked. The factor is never below 1: linked sites "
    "cannot carry more information than as many independent sites, so an estimate below "
    "1 is sampling error and counts as 1. The table keeps both the raw and the adjusted "
    "statistic. The neutral-share difference needs no such adjustment: its bootstrap "
    "resamples whole blocks."
)


def comparison_guides(view: ReportView) -> list[str]:
    """Plain-words paragraphs that explain the tests present in the comparison table."""
    tests = {r.get("test") for r in view.compare_rows or []}
    out = []
    if tests & {"shared_dfe_lrt", "ne_only_free_lrt", "ne_only_lrt"}:
        out.append(LINKAGE_GUIDE)
    if tests & {"ne_only_free_lrt", "ne_only_lrt"}:
        out.append(NE_ONLY_GUIDE)
    return out


def _pairs(
    rows: list[dict[str, Any]], pops: dict[str, PopulationView], method: str, level: float
) -> list[PairView]:
    order: dict[tuple[str, str], list] = {}
    for r in rows:
        order.setdefault((r["population_a"], r["population_b"]), []).append(r)
    out = []
    for (a, b), rs in order.items():
        sent: list[tuple[str, str]] = []
        for test in (
            "neutral_share_difference",
            "shared_dfe_lrt",
            "ne_only_free_lrt",
            "ne_only_lrt",
        ):
            for r in (x for x in rs if x["test"] == test):
                if test == "neutral_share_difference":
                    sent.append((test, _sentence_difference(r, pops, method, level)))
                elif test == "shared_dfe_lrt":
                    sent.append((test, _sentence_shared(r, method)))
                else:
                    sent.append((test, _sentence_ne_only(r, pops, method)))
        out.append(PairView(a, b, rs, sent))
    return out


def collect(
    fit_doc: dict[str, Any],
    compare_rows: list[dict[str, Any]] | None,
    spectra_docs: dict[str, dict[str, Any]] | None,
    provenance: dict[str, Any],
) -> ReportView:
    """Gather what the report shows from the documents.

    Parameters
    ----------
    fit_doc : dict
        A fit document (``driftband fit`` output).
    compare_rows : list of dict or None
        Rows of compare.tsv (:func:`~driftband.report.read_compare_tsv`).
    spectra_docs : dict of str to dict, or None
        Spectra documents keyed by label (as in ``driftband fit --label``) or path.
    provenance : dict
        Provenance of the report itself.

    Returns
    -------
    ReportView

    Raises
    ------
    InputError
        Documents that do not fit together (a comparison or spectra file naming
        populations the fit file does not hold, a sample size that differs).
    """
    check_fit_doc(fit_doc)
    spectra_docs = dict(spectra_docs or {})
    for key, doc in spectra_docs.items():
        check_spectra_doc(doc, key)
    if compare_rows is not None:
        check_compare_rows(compare_rows, fit_doc)
    options = fit_doc.get("options") or {}
    effect = str(options.get("effect", DEFAULT_EFFECT))
    views = []
    for k, (name, p) in enumerate(fit_doc["populations"].items()):
        boot = p.get("bootstrap") or {}
        level = boot.get("level", options.get("level", 0.95))
        blocks = boot.get("blocks")
        views.append(
            PopulationView(
                name=name,
                anchor=_anchor(k, name),
                record=p,
                best=p["best_model"],
                bands=_bands(p, effect),
                level=level if is_num(level) else 0.95,
                replicates=boot.get("replicates") if boot else None,
                blocks=blocks if is_num(blocks) else None,
                flags=_flags(name, p, blocks if is_num(blocks) else None),
            )
        )
    _match_spectra(views, spectra_docs)
    for v in views:
        if v.spectra_source is not None:
            v.flags += spectra_flags(spectra_docs[v.spectra_source])
    first = [b.lo for b in views[0].bands]
    if any([b.lo for b in v.bands] != first for v in views):
        raise InputError(
            "the populations of the fit file have different |Ne*s| band edges; "
            "the report needs one set (refit with the same --bands)"
        )
    methods = {str(r.get("adjust") or "") for r in compare_rows or []} - {""}
    adjust_known = len(methods) == 1
    method = adjust_name(methods.pop()) if adjust_known else "Holm"
    pops = {v.name: v for v in views}
    pairs = _pairs(compare_rows or [], pops, method, views[0].level)
    return ReportView(
        options=options,
        neutral=str(options.get("neutral", "4fold")),
        selected=str(options.get("selected", "0fold")),
        populations=views,
        pairs=pairs,
        compare_rows=compare_rows,
        fit_provenance=fit_doc.get("provenance") or {},
        spectra_docs=spectra_docs,
        provenance=provenance or {},
        adjust_method=method,
        adjust_known=adjust_known,
    )


def answer_sentence(v: PopulationView, selected: str) -> str:
    """The headline of one population in words."""
    b = v.bands[0]
    head = v.record.get("headline") or {}
    if is_num(b.ci_low) and is_num(b.ci_high):
        ci = f" ({pct(v.level)} CI {frange(b.ci_low, b.ci_high, 2)})"
    elif head.get("interval_reliable") is False and head.get("shares_ci"):
        ci = " (interval not shown: unreliable, see the flags)"
    elif v.replicates:
        ci = " (no interval, see the flags)"
    else:
        ci = " (no interval: no bootstrap)"
    status = "" if v.converged else " \u2014 the fit did not converge, see the flags"
    if headline_model(v.record) == "averaged":
        w = head.get("weights") or {}
        ws = ", ".join(
            f"{m} {fnum(x, 2)}" for m, x in sorted(w.items(), key=lambda t: -t[1]) if is_num(x)
        )
        under = f", averaged over the DFE families by Akaike weight ({ws})"
    else:
        under = f" under the {v.best} DFE (lowest AIC)"
    flag = bound_flag(v.best_fit)
    status += f" \u2014 {flag}, see the flags" if flag else ""
    return (
        f"{v.name}: a share of {fnum(b.share, 2)}{ci} of new {selected} mutations is "
        f"effectively neutral (|Ne\u00b7s| < {b.hi:g}, |S| < {b.hi_s:g}){under}"
        f"{status}."
    )
