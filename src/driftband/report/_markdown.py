"""``summary.md``: the report's headline numbers for a terminal or a notebook."""

from __future__ import annotations

import re
from typing import Any

from ..effect import convention_text
from ._spectra_made import spectra_made_rows
from ._text import (
    ALPHA_NEGATIVE_NOTE,
    CAUTIONS,
    FOLDED_SHORT,
    NA,
    REFERENCES,
    conventions,
    fnum,
    frange,
    fsig,
    is_num,
    pct,
)
from ._view import ReportView, answer_sentence, comparison_guides

__all__ = ["render_markdown"]

# Markdown that text from a file could trigger: code, emphasis, links, raw HTML tags.
_MD_SPECIAL = re.compile(r"[\\`*\[\]]|<(?=[A-Za-z/!?])|(?<![A-Za-z0-9])_|_(?![A-Za-z0-9])")


def md(text: object) -> str:
    """Escape Markdown in text from a file (CommonMark backslash escapes), one line."""
    return _MD_SPECIAL.sub(lambda m: "\\" + m.group(0), str(text)).replace("\n", " ")


def cell(text: object) -> str:
    """:func:`md` for a table cell (``|`` escaped too)."""
    return md(text).replace("|", "\\|")


def _row(cells: list[str]) -> str:
    return "| " + " | ".join(cells) + " |"


def _at_bounds_text(record: dict[str, Any]) -> str:
    """``lognormal: sd_log_abs_S at bound (0.01); gamma: misorientation_rate at bound
    (1e−6)`` or empty."""
    parts = []
    for m, f in (record.get("models") or {}).items():
        params = dict(f.get("params") or {}, misorientation_rate=f.get("misorientation_rate"))
        names = f.get("at_bounds") or []
        if names:
            parts.append(
                f"{m}: " + ", ".join(f"{n} at bound ({fsig(params.get(n))})" for n in names)
            )
    return "; ".join(parts)


def render_markdown(view: ReportView) -> str:
    """The Markdown summary of a :class:`ReportView` (same numbers as the HTML)."""
    sel, lvl = view.selected, pct(view.level)
    prov = view.provenance
    b0 = view.populations[0].bands[0]
    out = [
        "# Effectively neutral share of new mutations",
        "",
        f"Generated {md(prov.get('date', NA))} by "
        f"{md(prov.get('software', 'driftband'))} {md(prov.get('version', ''))}.",
        "",
        "## Answer",
        "",
        f"Share of new {md(sel)} (selected-class) mutations in the effectively neutral band "
        f"|Ne·s| < {b0.hi:g} (|S| < {b0.hi_s:g}), headline model (averaged over the DFE "
        f"families by Akaike weight, or the AIC-best one), {lvl} block-bootstrap interval "
        "(for the averaged shares, of the families' replicates weighted by their Akaike "
        "weights):",
        "",
        _row(
            [
                "population",
                "headline model",
                f"share \\|Ne·s\\| < {b0.hi:g}",
                f"{lvl} interval",
                "fit",
            ]
        ),
        _row(["---"] * 5),
    ]
    for v in view.populations:
        b = v.bands[0]
        out.append(
            _row(
                [
                    cell(v.name),
                    cell(v.headline),
                    fnum(b.share),
                    frange(b.ci_low, b.ci_high),
                    "converged" if v.converged else "**not converged**",
                ]
            )
        )
    out += ["", f"{md(convention_text(view.effect))}.", ""]
    out += [f"- {md(answer_sentence(v, sel))}" for v in view.populations]
    hist = [
        (v, h) for v in view.populations if isinstance(h := v.best_fit.get("size_history"), dict)
    ]
    if hist:
        out += ["", "Size histories (S and the shares refer to the current size):", ""]
        for v, h in hist:
            if h.get("model") == "nuisance":
                out.append(f"- {md(v.name)}: nuisance factors (kept by auto: lower AIC)")
                continue
            pars = ", ".join(f"{k} = {fsig(x)}" for k, x in (h.get("params") or {}).items())
            out.append(f"- {md(v.name)}: {md(h.get('model'))}" + (f" ({md(pars)})" if pars else ""))
    out += ["", f"All bands (estimate and {lvl} interval):", ""]
    bands = view.populations[0].bands
    out.append(
        _row(["population"] + [f"\\|Ne·s\\| {b.label} (\\|S\\| {b.label_s})" for b in bands])
    )
    out.append(_row(["---"] * (len(bands) + 1)))
    for v in view.populations:
        out.append(
            _row(
                [cell(v.name)]
                + [f"{fnum(b.share)} ({frange(b.ci_low, b.ci_high)})" for b in v.bands]
            )
        )
    out += ["", "## Comparisons", ""]
    if view.compare_rows is None:
        out.append("No comparison table was given.")
    else:
        for pair in view.pairs:
            out.append(f"### {md(pair.a)} and {md(pair.b)}")
            out.append("")
            out += [f"- {md(s)}" for _t, s in pair.sentences]
            out.append("")
        for g in comparison_guides(view):
            out += [md(g), ""]
        out.append(
            "p-values adjusted across pairs, test by test"
            + (
                f" ({md(view.adjust_method)})."
                if view.adjust_known
                else " (Holm unless 'driftband compare' was run with another --adjust)."
            )
        )
    out += ["", "## Warnings", ""]
    flagged = [(v, f) for v in view.populations for f in v.flags]
    if flagged:
        out += [f"- {md(v.name)}: {md(f)}" for v, f in flagged]
    else:
        out.append("None: every fit converged and no data warning was raised.")
    out += ["", "## Per population", ""]
    for v in view.populations:
        out.append(f"### {md(v.name)}")
        out.append("")
        out.append(
            f"- n = {v.n} gene copies, {'folded' if v.folded else 'unfolded'} spectra; "
            f"best model {md(v.best)}"
            + (
                f"; bootstrap {v.replicates} replicates over {v.blocks} blocks"
                if v.replicates is not None
                else "; no bootstrap"
            )
        )
        if v.folded:
            out.append(f"- {md(FOLDED_SHORT)}")
        if v.spectra is not None:
            st = v.spectra.get("stats") or {}
            sn, ss = st.get(view.neutral) or {}, st.get(view.selected) or {}
            out.append(
                f"- π_N/π_S = {fnum(st.get('piN_piS'))}; "
                f"π per site {md(view.neutral)} {fnum(sn.get('pi'), 5)}, "
                f"{md(view.selected)} {fnum(ss.get('pi'), 5)}; Tajima's D "
                f"{md(view.neutral)} {fnum(sn.get('tajimas_d'))}, "
                f"{md(view.selected)} {fnum(ss.get('tajimas_d'))}"
            )
        at = _at_bounds_text(v.record)
        if at:
            out.append(f"- parameters at a bound (no standard error): {md(at)}")
        ad = (v.record.get("adaptive") or {}).get(v.best)
        if isinstance(ad, dict):
            d = ad.get("alpha_dfe") or {}
            asym = ad.get("alpha_asymptotic") or {}
            implied = d.get("alpha_model")
            out.append(
                f"- α (DFE-corrected, {md(v.best)}) = {fnum(d.get('alpha'))}, "
                f"ω_a = {fnum(d.get('omega_a'), 4)}; α classic = "
                f"{fnum(ad.get('alpha_classic'))}; α asymptotic = "
                f"{fnum(asym.get('alpha'))}"
                + (f"; α implied by the DFE = {fnum(implied)}" if is_num(implied) else "")
                + (f" (⚠ {md(ad['caveat'])})" if ad.get("caveat") else "")
            )
            classic = ad.get("alpha_classic")
            if is_num(classic) and classic < 0:
                out.append(f"  - {md(ALPHA_NEGATIVE_NOTE)}")
        out.append("")
    if view.spectra_docs:
        out += ["## How the spectra were made", ""]
        for key, doc in view.spectra_docs.items():
            out.append(f"- {md(key)}:")
            out += [f"  - {md(item)}: {md(value)}" for item, value in spectra_made_rows(doc)]
        out.append("")
    out += ["## Conventions", ""] + [f"- {md(c)}" for c in conventions(view.effect)]
    out += ["", "## Cautions", ""] + [f"- **{md(t)}.** {md(x)}" for t, x in CAUTIONS]
    out += ["", "## References", ""] + [f"- {md(r)}" for r in REFERENCES]
    out.append("")
    return "\n".join(out)
