"""The self-contained HTML report (no network, no script needed, plots inline).

Longer than the ~600-line guide (about 830 lines, one call argument per line after
formatting): one renderer per report section, all of them HTML rendering of the view
objects of :mod:`driftband.report._view`; splitting the sections apart would scatter
one page's markup over several files.
"""

from __future__ import annotations

import html
import json
import math
from collections.abc import Iterable
from typing import Any

from ..effect import convention_text
from ..fit.size_history import simulate_history_option
from ..prf.families import discrete_family_edges
from ..spectra.callable import CALLABLE_SOURCES
from ._plots import bands_figure, history_figure, spectra_figure
from ._spectra_made import spectra_made_rows
from ._text import (
    ALPHA_EXPLAINED,
    ALPHA_NEGATIVE_NOTE,
    CAUTIONS,
    FOLDED_SHORT,
    MINUS,
    NA,
    REFERENCES,
    band_label,
    conventions,
    fint,
    fnum,
    fp,
    frange,
    frange_sig,
    fsig,
    is_num,
    param_label,
    pct,
)
from ._view import PopulationView, ReportView, answer_sentence, comparison_guides

__all__ = ["render_html"]

CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;
 color:#1a1a1a;background:#fff;margin:0;line-height:1.45}
main{max-width:1100px;margin:0 auto;padding:1rem 1.5rem 3rem}
h1{font-size:1.55rem;margin:.8rem 0 .2rem}h2{font-size:1.25rem;margin-top:2.2rem;
 border-bottom:2px solid #0072B2;padding-bottom:.15rem}h3{font-size:1.05rem;margin-top:1.4rem}
.sub{color:#444;margin:0 0 .6rem}
nav{background:#f3f6f9;border:1px solid #d6dee6;padding:.4rem .8rem;font-size:.92rem}
nav a{margin-right:.9rem;color:#0a5a91}
table{border-collapse:collapse;margin:.5rem 0 1rem;font-size:.9rem}
.wrap{max-width:100%;overflow-x:auto}td.note{min-width:9rem}
#compare-table{font-size:.8rem}#compare-table td,#compare-table th{padding:.2rem .35rem}
caption{caption-side:top;text-align:left;font-weight:600;padding:.2rem 0}
th,td{border:1px solid #c9d1d9;padding:.25rem .55rem;vertical-align:top}
th{background:#eef2f6;text-align:left}td.num{text-align:right;font-variant-numeric:tabular-nums;
 white-space:nowrap}
tr.best td{background:#eaf4fb}
.headline td.share{font-size:1.15rem;font-weight:700}
.flag{background:#fff6e0;border-left:4px solid #E69F00;padding:.4rem .8rem;margin:.5rem 0}
.ok{background:#eaf7f1;border-left:4px solid #009E73;padding:.4rem .8rem;margin:.5rem 0}
.bad{font-weight:700}
figure{margin:.8rem 0 1.2rem}figure img{max-width:100%;height:auto;border:1px solid #eee}
figcaption{font-size:.88rem;color:#333;max-width:60rem}
.answer li,.pair li{margin:.3rem 0}
.note{font-size:.86rem;color:#444}
code,.mono{font-family:ui-monospace,"DejaVu Sans Mono",monospace;font-size:.84rem;
 word-break:break-all}
dl.cautions dt{font-weight:700;margin-top:.5rem}dl.cautions dd{margin-left:1.2rem}
@media print{nav{display:none}h2{page-break-before:auto}}
"""


class _H(str):
    """Markup that is already escaped."""


def esc(v: Any) -> str:
    """HTML-escape any value from a file (quotes too)."""
    return v if isinstance(v, _H) else html.escape(str(v), quote=True)


def _cell(v: Any, tag: str = "td") -> str:
    cls = ""
    if isinstance(v, tuple):  # (text, css class)
        v, cls = v
    return f"<{tag}{f' class={chr(34)}{cls}{chr(34)}' if cls else ''}>{esc(v)}</{tag}>"


#: A table cell: a value (escaped when rendered), or (value, css class).
Cell = Any


def _table(
    tid: str, caption: str, header: list[str], rows: Iterable[tuple[list[Cell], str]], css: str = ""
) -> str:
    """A table; each row is (cells, row css class); a cell is a value or (value, class)."""
    out = [
        '<div class="wrap">',
        f'<table id="{esc(tid)}"{f" class={chr(34)}{css}{chr(34)}" if css else ""}>',
        f"<caption>{esc(caption)}</caption>",
        "<thead><tr>" + "".join(_cell(h, "th") for h in header) + "</tr></thead><tbody>",
    ]
    for cells, rcls in rows:
        out.append(
            f"<tr{f' class={chr(34)}{rcls}{chr(34)}' if rcls else ''}>"
            + "".join(_cell(c) for c in cells)
            + "</tr>"
        )
    out.append("</tbody></table></div>")
    return "\n".join(out)


def _num(text: str) -> tuple[str, str]:
    return (text, "num")


def _figure(uri: str, alt: str, caption: str) -> str:
    return (
        f'<figure><img src="{uri}" alt="{esc(alt)}">'
        f"<figcaption>{esc(caption)}</figcaption></figure>"
    )


def _status(ok: bool) -> tuple[str, str]:
    return ("converged", "") if ok else ("\u26a0 not converged", "bad")


# ----------------------------------------------------------------------------- sections


def _answer(view: ReportView) -> str:
    sel, lvl = view.selected, pct(view.level)
    b0 = view.populations[0].bands[0]
    has_ds = len({v.dataset for v in view.populations}) > 1
    head = (
        ["Population"]
        + (["Dataset"] if has_ds else [])
        + [
            "Best model (AIC)",
            f"Share, |Ne\u00b7s| < {b0.hi:g}",
            f"{lvl} interval",
            "Bootstrap (replicates, blocks)",
            "Fit",
        ]
    )
    rows = []
    for v in view.populations:
        b = v.bands[0]
        boot = f"{v.replicates}, {v.blocks}" if v.replicates is not None else "none"
        rows.append(
            (
                [v.name]
                + ([v.dataset] if has_ds else [])
                + [
                    v.headline,
                    (fnum(b.share), "num share"),
                    _num(frange(b.ci_low, b.ci_high)),
                    _num(boot),
                    _status(v.converged),
                ],
                "",
            )
        )
    out = [
        '<section id="answer"><h2>The answer: effectively neutral share per population</h2>',
        f"<p>Share of new mutations at {esc(sel)} (selected-class) sites whose scaled "
        f"effect lies in the effectively neutral band |Ne\u00b7s| &lt; {b0.hi:g} "
        f"(|S| &lt; {b0.hi_s:g}), averaged over the DFE families by their Akaike "
        "weights (or under the AIC-best family where the fit asked for it), with "
        f"{esc(lvl)} block-bootstrap intervals in which the model choice is redone in "
        "every replicate (for the averaged shares, percentiles of the families' replicates "
        "weighted by each replicate's Akaike weights, so that disagreement between the "
        "families widens them).</p>",
        _table("headline", "Effectively neutral share of new mutations", head, rows, "headline"),
        f'<p class="convention">{esc(convention_text(view.effect))}.</p>',
        '<ul class="answer">'
        + "".join(f"<li>{esc(answer_sentence(v, sel))}</li>" for v in view.populations)
        + "</ul>",
    ]
    flagged = [v for v in view.populations if v.flags]
    if flagged:
        links = ", ".join(
            f'<a href="#{v.anchor}">{esc(v.name)}</a> ({len(v.flags)})' for v in flagged
        )
        out.append(
            f'<p class="flag">\u26a0 Fit or data warnings for {links}: read them in '
            "the population sections before relying on these numbers.</p>"
        )
    else:
        out.append('<p class="ok">\u2713 Every best-model fit converged; no data warnings.</p>')
    pops = [
        {
            "name": v.name,
            "model": v.headline,
            "bands": [(b.label, b.label_s, b.share, b.ci_low, b.ci_high) for b in v.bands],
        }
        for v in view.populations
    ]
    out.append(
        _figure(
            bands_figure(pops, sel, lvl),
            "Grouped bar chart of band shares for every population",
            f"Share of new {sel} mutations in each band of |Ne\u00b7s| (bottom axis) and of "
            f"|S| = {b0.s_per_nes:g}|Ne\u00b7s| (top axis), headline shares per population "
            "(averaged over "
            "the DFE families by Akaike weight unless the fit asked for the AIC-best "
            f"family); black bars: {lvl} "
            "bootstrap percentile intervals; the shaded band is the effectively neutral one. "
            "Colours: Okabe\u2013Ito colour-blind-safe palette, with hatching per population.",
        )
    )
    bands = view.populations[0].bands
    head = ["Population", "Model"] + [f"|Ne\u00b7s| {b.label} (|S| {b.label_s})" for b in bands]
    rows = []
    for v in view.populations:
        rows.append(
            (
                [v.name, v.headline]
                + [_num(f"{fnum(b.share)} ({frange(b.ci_low, b.ci_high)})") for b in v.bands],
                "",
            )
        )
    out.append(
        _table("bands", f"Shares in all |Ne\u00b7s| bands, estimate ({lvl} interval)", head, rows)
    )
    out.append(f'<p class="convention">{esc(convention_text(view.effect))}.</p>')
    out.append("</section>")
    return "\n".join(out)


def _comparisons(view: ReportView) -> str:
    out = ['<section id="comparisons"><h2>Comparisons between populations</h2>']
    if view.compare_rows is None:
        out.append(
            "<p>No comparison table was given (make one with 'driftband compare' "
            "and pass it with --compare).</p></section>"
        )
        return "\n".join(out)
    for pair in view.pairs:
        out.append(f"<h3>{esc(pair.a)} and {esc(pair.b)}</h3>")
        out.append(
            '<ul class="pair">'
            + "".join(f"<li>{esc(s)}</li>" for _t, s in pair.sentences)
            + "</ul>"
        )
    out += [f"<p>{esc(g)}</p>" for g in comparison_guides(view)]
    how = (
        f"p-values are adjusted across pairs, test by test ({esc(view.adjust_method)})."
        if view.adjust_known
        else "p-values are adjusted across pairs, test by test, by 'driftband compare' (Holm "
        "unless it was run with another --adjust; the table does not record the method)."
    )
    out.append(
        f'<p class="note">{how} The neutral-share difference uses paired bootstrap '
        "replicates; the likelihood-ratio tests refer their statistic to \u03c7\u00b2 "
        "with the number of DFE parameters as degrees of freedom. The Ne ratio of "
        "the 'only Ne differs' test comes from neutral diversity and carries the "
        "stated mutation-rate assumption.</p>"
    )
    known = list(_COMPARE_HEADERS)
    extra = sorted({k for r in view.compare_rows for k in r} - set(known) - {"_line"})
    cols = [c for c in known + extra if any(r.get(c) not in (None, "") for r in view.compare_rows)]
    rows = []
    for r in view.compare_rows:
        cells: list[Cell] = []
        for c in cols:
            v = r.get(c)
            if c in ("p_value", "p_adjusted"):
                cells.append(_num(fp(v)))
            elif c == "df":
                cells.append(_num(fnum(v, 0)))
            elif c == "note":
                cells.append(("" if v is None else v, "note"))
            elif c == "test" and isinstance(v, str):  # let long test names wrap
                cells.append(_H(esc(v).replace("_", "_<wbr>")))
            elif isinstance(v, float | int) and not isinstance(v, bool):
                cells.append(_num(fsig(v)))
            else:
                cells.append("" if v is None else v)
        rows.append((cells, ""))
    out.append(
        _table(
            "compare-table",
            "All comparisons (compare.tsv; empty columns left out)",
            [_COMPARE_HEADERS.get(c, c) for c in cols],
            rows,
        )
    )
    out.append("</section>")
    return "\n".join(out)


_COMPARE_HEADERS = {
    "population_a": "A",
    "population_b": "B",
    "test": "Test",
    "model": "Model",
    "statistic": "Statistic",
    "df": "df",
    "p_value": "p",
    "p_adjusted": "Adjusted p",
    "estimate": "Estimate",
    "ci_low": "CI low",
    "ci_high": "CI high",
    "ne_ratio": "Ne ratio B/A",
    "predicted_share_b": "Predicted share B",
    "observed_share_b": "Observed share B",
    "note": "Note",
}


def _aic_table(v: PopulationView) -> str:
    table = v.record.get("aic_table")
    rows = []
    if isinstance(table, list) and table:
        for r in table:
            m = r.get("model")
            conv = r.get("converged", v.record["models"].get(m, {}).get("success"))
            rows.append(
                (
                    [
                        m,
                        _num(fsig(r.get("loglik"), 6)),
                        _num(fnum(r.get("n_params"), 0)),
                        _num(fsig(r.get("aic"), 6)),
                        _num(fnum(r.get("delta_aic"), 2)),
                        _num(fnum(r.get("weight"), 3)),
                        _status(bool(conv)),
                    ],
                    "best" if m == v.best else "",
                )
            )
    else:
        for m, f in sorted(
            v.record["models"].items(),
            key=lambda kv: kv[1].get("aic") if is_num(kv[1].get("aic")) else math.inf,
        ):
            rows.append(
                (
                    [
                        m,
                        _num(fsig(f.get("loglik"), 6)),
                        _num(fnum(f.get("n_params"), 0)),
                        _num(fsig(f.get("aic"), 6)),
                        _num(NA),
                        _num(NA),
                        _status(bool(f.get("success"))),
                    ],
                    "best" if m == v.best else "",
                )
            )
    return _table(
        f"aic-{v.anchor}",
        f"Model comparison, {v.name} (best model highlighted)",
        ["Model", "log-likelihood", "parameters", "AIC", "\u0394AIC", "Akaike weight", "Fit"],
        rows,
    )


def _models_in_order(v: PopulationView) -> list[str]:
    return [v.best] + [m for m in v.record["models"] if m != v.best]


def _shares_table(v: PopulationView) -> str:
    edges = [b.lo for b in v.bands] + [math.inf]
    head = ["Model"] + [
        f"|Ne\u00b7s| {band_label(edges[k], edges[k + 1])}" for k in range(len(v.bands))
    ]
    rows = []
    for m in _models_in_order(v):
        f = v.record["models"][m]
        ci = v.model_ci(m).get("shares_ci") or []
        cells: list[Cell] = [m]
        for k, s in enumerate(f["shares"]):
            c = ci[k] if k < len(ci) and isinstance(ci[k], list) and len(ci[k]) == 2 else [None] * 2
            cells.append(_num(f"{fnum(s)} ({frange(c[0], c[1])})"))
        rows.append((cells, "best" if m == v.best else ""))
    return _table(
        f"shares-{v.anchor}",
        f"Band shares under every model, {v.name}: estimate ({pct(v.level)} "
        "interval) \u2014 how much the answer depends on the model",
        head,
        rows,
    )


def _params_table(v: PopulationView) -> str:
    rows = []
    edges = [b.lo for b in v.bands]
    for m in _models_in_order(v):
        f = v.record["models"][m]
        se = f.get("stderr") or {}
        ci = v.model_ci(m).get("params_ci") or {}
        items = list((f.get("params") or {}).items())
        masses = sum(1 for k, _ in items if k.startswith("mass_"))
        # the discrete family's own bands: the report's, the first one split (fit files
        # of schema 4 on; older ones have one mass per report band)
        labels = list(discrete_family_edges(edges)) if masses == len(edges) + 1 else edges
        if f.get("misorientation_free"):
            items.append(("misorientation_rate", f.get("misorientation_rate")))
        items.append(("theta", f.get("theta")))
        items.append(("fixation_ratio", f.get("fixation_ratio")))
        if "beneficial_fraction" in (f.get("params") or {}) and "fixation_ratio_deleterious" in f:
            items.append(("fixation_ratio_deleterious", f.get("fixation_ratio_deleterious")))
        bound = set(f.get("at_bounds") or [])
        for name, val in items:
            got = ci.get(name)
            c = got if isinstance(got, list) else [None, None]
            se_text = fsig(se.get(name)) if name in se else "\u2014"
            est, ci_text = fsig(val), frange_sig(c[0], c[1])
            if name in bound:
                # no estimate ± s.e. for a parameter at a bound (see the flags)
                est, se_text = f"at bound ({est})", "\u2014"
                if c[0] is not None and fsig(c[0]) == fsig(c[1]):
                    ci_text = "\u2014 (the replicates sit on the bound)"
            rows.append(
                (
                    [
                        m,
                        name,
                        param_label(name, labels),
                        _num(est),
                        _num(se_text),
                        _num(ci_text),
                    ],
                    "best" if m == v.best else "",
                )
            )
    return _table(
        f"params-{v.anchor}",
        f"DFE parameters, {v.name}: estimate, asymptotic "
        f"standard error and {pct(v.level)} bootstrap interval",
        ["Model", "Parameter", "Meaning", "Estimate", "s.e.", "Interval"],
        rows,
    )


def _history(v: PopulationView) -> str:
    """The explicit size history of the headline fit: a plot of N over time, the
    parameters with their bootstrap intervals, and the AIC of the candidates."""
    f = v.best_fit
    h = f.get("size_history")
    if not isinstance(h, dict):
        return ""
    out = ["<h3>Size history</h3>"]
    aic_n = h.get("aic_nuisance_factors") or {}
    aic_h = h.get("aic_history") or {}
    if h.get("model") == "nuisance":
        rej = h.get("rejected_history") or {}
        out.append(
            f"<p>{esc(v.name)}: with <code>auto</code>, the nuisance factors fit better "
            f"(lowest AIC {esc(fsig(min(aic_n.values(), default=math.nan)))}) than the best "
            f"explicit history, {esc(rej.get('model'))} (lowest AIC "
            f"{esc(fsig(min(aic_h.values(), default=math.nan)))}): S is tied to no "
            "particular size for this population.</p>"
        )
        return "\n".join(out)
    ci = v.model_ci(v.best).get("params_ci") or {}
    src = str(h.get("requested", ""))
    how = (
        f"read from {src[len('demes:') :]}"
        if h.get("model") == "demes"
        else "fitted to the neutral class"
        + (" (chosen by AIC among the candidates below)" if h.get("candidates_aic") else "")
    )
    out.append(
        f"<p>{esc(v.name)}: {esc(h.get('model'))} history, {esc(how)}. S = 4Ns and the "
        "shares refer to the <strong>current</strong> size (at the sample); sizes are "
        "ratios to the ancestral size N_anc, times in units of 2\u00b7N_anc generations "
        "before the sample.</p>"
    )
    epochs = h.get("epochs") or []
    if epochs:
        uri = history_figure(v.name, epochs, str(h.get("model")), v.anchor)
        out.append(
            _figure(
                uri,
                f"Size history of {v.name}",
                f"Size N over N_anc against time before the sample, {v.name}.",
            )
        )
    rows = []
    for name, val in (h.get("params") or {}).items():
        c = ci.get(f"history_{name}")
        c = c if isinstance(c, list) else [None, None]
        rows.append(([name, _num(fsig(val)), _num(frange_sig(c[0], c[1]))], ""))
    if rows:
        out.append(
            _table(
                f"history-{v.anchor}",
                f"Size history of {v.name}: estimate and {pct(v.level)} bootstrap interval "
                "(each replicate refits the history)",
                ["Parameter", "Estimate", "Interval"],
                rows,
            )
        )
    if aic_n:
        out.append(
            f"<p>Against nuisance factors: lowest AIC {esc(fsig(min(aic_h.values())))} "
            f"with this history, {esc(fsig(min(aic_n.values())))} with nuisance factors "
            "(both of the two classes together).</p>"
        )
    cand = h.get("candidates_aic") or {}
    if cand:
        best = min(cand.values())
        crow = [
            ([m, _num(fsig(a)), _num(fsig(a - best))], "best" if a == best else "")
            for m, a in sorted(cand.items(), key=lambda kv: kv[1])
        ]
        out.append(
            _table(
                f"history-aic-{v.anchor}",
                f"History models compared on the neutral class of {v.name} (AIC)",
                ["History", "AIC", "\u0394AIC"],
                crow,
            )
        )
    sim = simulate_history_option(h, v.name.rsplit("/", 1)[-1])
    if sim:
        out.append(
            "<p>To simulate from this history (power or sanity checks), with an ancestral "
            "size of 1,000 chosen for the simulation: <code>driftband simulate --history "
            f"{esc(sim)}</code> (generations before the sample and sizes; the spectra fix "
            "only 4\u00b7N_anc\u00b7\u03bc, so the ancestral size is a choice).</p>"
        )
    out.append(
        '<p class="note">A fitted history describes the neutral spectrum; it is not proof '
        "of past events. Linked selection, structure and migration also shape spectra, "
        "and different histories can fit about equally well.</p>"
    )
    return "\n".join(out)


def _diversity(v: PopulationView, view: ReportView) -> str:
    if v.spectra is None:
        return (
            "<p>No spectra file for this population was given (pass it with --spectra): "
            "no diversity statistics.</p>"
        )
    st = v.spectra.get("stats") or {}
    classes = v.spectra.get("classes") or {}
    names = [c for c in (view.neutral, view.selected) if c in st or c in classes]
    names += sorted(
        c
        for c in set(st) | set(classes)
        if c not in names and isinstance(st.get(c, {}), dict) and c != "piN_piS"
    )
    if not names:
        return "<p>The spectra file holds no diversity statistics for this population.</p>"
    rows = []
    for c in names:
        s = st.get(c) or {}
        role = "neutral" if c == view.neutral else "selected" if c == view.selected else "other"
        rows.append(
            (
                [
                    c,
                    role,
                    _num(fint((classes.get(c) or {}).get("sites"))),
                    _num(fint(s.get("segregating"))),
                    _num(fsig(s.get("pi"))),
                    _num(fsig(s.get("theta_w"))),
                    _num(fnum(s.get("tajimas_d"), 3)),
                    _num(fint(s.get("fixed_derived")) if "fixed_derived" in s else "\u2014"),
                ],
                "",
            )
        )
    rows.append(
        (
            [
                f"\u03c0_N/\u03c0_S ({view.selected}/{view.neutral})",
                "ratio",
                "",
                "",
                _num(fnum(st.get("piN_piS"), 3)),
                "",
                "",
                "",
            ],
            "best",
        )
    )
    pol = v.spectra.get("polarisation")
    cap = (
        f"Diversity, {v.name} (from {v.spectra_source}; polarisation: {pol or NA}); "
        "\u03c0 and \u03b8_W per site"
    )
    return _table(
        f"diversity-{v.anchor}",
        cap,
        [
            "Class",
            "Role",
            "Callable sites",
            "Segregating sites",
            "\u03c0 per site",
            "\u03b8_W per site",
            "Tajima's D",
            "Fixed derived (divergence)",
        ],
        rows,
    )


def _adaptive(v: PopulationView, view: ReportView) -> str:
    ad = v.record.get("adaptive") or {}
    present = {m: a for m, a in ad.items() if isinstance(a, dict)}
    if not present:
        return (
            "<p>No divergence counts (folded spectra, or no outgroup/ancestral "
            "allele): no McDonald\u2013Kreitman table or \u03b1.</p>"
        )
    first = present.get(v.best) or next(iter(present.values()))
    mk = first.get("mk") or {}
    out = [
        _table(
            f"mk-{v.anchor}",
            f"McDonald\u2013Kreitman table, {v.name}",
            ["Sites", "Divergence (fixed derived)", "Polymorphism"],
            [
                (
                    [
                        f"{view.selected} (selected)",
                        _num(fint(mk.get("divergent_selected"))),
                        _num(fint(mk.get("polymorphic_selected"))),
                    ],
                    "",
                ),
                (
                    [
                        f"{view.neutral} (neutral)",
                        _num(fint(mk.get("divergent_neutral"))),
                        _num(fint(mk.get("polymorphic_neutral"))),
                    ],
                    "",
                ),
                (
                    [
                        f"Fisher's exact test: odds ratio {fsig(mk.get('fisher_odds_ratio'))}, "
                        f"two-sided p = {fp(mk.get('fisher_p'))}",
                        "",
                        "",
                    ],
                    "",
                ),
            ],
        )
    ]
    best_ci = v.model_ci(v.best).get("params_ci") or {}
    caveat = first.get("caveat")
    # few substitutions: no bootstrap interval of the count-based estimates (item text)
    few = _num("not shown (few substitutions)")

    def ci(d, key, counts=True):
        c = d.get(key)
        if counts and caveat:
            return few
        return _num(frange(c[0], c[1], 3)) if isinstance(c, list) and len(c) == 2 else _num(NA)

    def val(x, digits=3):
        return _num(fnum(x, digits) + (" \u26a0" if caveat else ""))

    asym = first.get("alpha_asymptotic") or {}
    rows = [
        (
            [
                "\u03b1, classic (Smith & Eyre-Walker 2002)",
                "\u2014",
                val(first.get("alpha_classic")),
                ci(best_ci, "alpha_classic"),
            ],
            "",
        ),
        (
            [
                f"\u03b1, asymptotic (Messer & Petrov 2013; {asym.get('fit', NA)} fit)",
                "\u2014",
                val(asym.get("alpha")),
                ci(best_ci, "alpha_asymptotic"),
            ],
            "",
        ),
    ]
    for m in _models_in_order(v):
        a = present.get(m)
        if not a:
            continue
        d = a.get("alpha_dfe") or {}
        mci = v.model_ci(m).get("params_ci") or {}
        cls = "best" if m == v.best else ""
        rows.append(
            (
                [
                    "\u03b1, DFE-corrected (Eyre-Walker & Keightley 2009)",
                    m,
                    val(d.get("alpha")),
                    ci(mci, "alpha_dfe"),
                ],
                cls,
            )
        )
        rows.append(
            (
                [
                    "\u03c9_a, adaptive substitution rate relative to neutral",
                    m,
                    val(d.get("omega_a"), 4),
                    ci(mci, "omega_a"),
                ],
                cls,
            )
        )
        rows.append((["\u03c9 = d_N/d_S", m, val(d.get("omega"), 4), _num(NA)], cls))
        if is_num(d.get("alpha_model")):
            rows.append(
                (
                    [
                        "\u03b1 implied by the DFE (beneficial class)",
                        m,
                        _num(fnum(d.get("alpha_model"))),
                        ci(mci, "alpha_model", counts=False),
                    ],
                    cls,
                )
            )
    out.append(
        _table(
            f"alpha-{v.anchor}",
            f"Proportion of adaptive substitutions, {v.name} ({pct(v.level)} bootstrap intervals)",
            ["Estimate", "Model", "Value", "Interval"],
            rows,
        )
    )
    if caveat:
        out.append(f'<p class="flag">\u26a0 {esc(caveat)}.</p>')
    implied = any(is_num((a.get("alpha_dfe") or {}).get("alpha_model")) for a in present.values())
    # the last of ALPHA_EXPLAINED is on the α implied by the DFE
    lines = [*(ALPHA_EXPLAINED if implied else ALPHA_EXPLAINED[:-1]), ALPHA_NEGATIVE_NOTE]
    out.append('<ul class="note">' + "".join(f"<li>{esc(t)}</li>" for t in lines) + "</ul>")
    return "\n".join(out)


def _population(v: PopulationView, view: ReportView) -> str:
    d = v.record["data"]
    out = [f'<section id="{esc(v.anchor)}"><h2>Population {esc(v.name)}</h2>']
    facts = [
        f"n = {v.n} gene copies",
        "folded spectra" if v.folded else "unfolded spectra",
        f"callable sites: {fint(d.get('sites_neutral'))} {view.neutral}, "
        f"{fint(d.get('sites_selected'))} {view.selected}",
    ]
    if v.dataset:
        facts.insert(0, f"dataset {v.dataset}")
    if v.replicates is not None:
        facts.append(f"bootstrap: {v.replicates} replicates over {v.blocks} blocks")
    out.append(f"<p>{esc('; '.join(facts))}.</p>")
    if v.folded:
        out.append(f'<p class="note">{esc(FOLDED_SHORT)}</p>')
    if v.flags:
        out.append(
            '<div class="flag"><strong>\u26a0 Warnings</strong><ul>'
            + "".join(f"<li>{esc(f)}</li>" for f in v.flags)
            + "</ul></div>"
        )
    else:
        out.append('<p class="ok">\u2713 All models converged; no data warnings.</p>')
    f = v.best_fit
    if f.get("observed") and f.get("expected"):
        uri = spectra_figure(
            v.name,
            v.n,
            v.folded,
            view.neutral,
            view.selected,
            f["observed"],
            f["expected"],
            f.get("pearson_residuals") or {},
            v.best,
            v.anchor,
        )
        out.append(
            _figure(
                uri,
                f"Observed and expected spectra of {v.name}",
                f"Observed (bars) and expected (line, {v.best} model) counts of polymorphic sites "
                f"per {'minor' if v.folded else 'derived'}-allele count, neutral ({view.neutral}) "
                f"and selected ({view.selected}) class, {v.name}; below, Pearson residuals "
                f"(observed {MINUS} expected)/\u221aexpected with \u00b12 marked.",
            )
        )
    out += [
        _aic_table(v),
        _shares_table(v),
        _params_table(v),
        _history(v),
        "<h3>Diversity</h3>",
        _diversity(v, view),
        "<h3>Divergence: McDonald\u2013Kreitman and \u03b1</h3>",
        _adaptive(v, view),
        "</section>",
    ]
    return "\n".join(out)


def _files(prov: dict[str, Any], source: str) -> list[tuple[list, str]]:
    rows = []
    for role, rec in (prov.get("inputs") or {}).items():
        recs = rec if isinstance(rec, list) else [rec]
        for r in recs:
            if isinstance(r, dict):
                rows.append(
                    (
                        [
                            source,
                            role,
                            (r.get("path") or "", "mono"),
                            _num(fint(r.get("size"))),
                            (r.get("sha256") or NA, "mono"),
                        ],
                        "",
                    )
                )
            elif r is not None:
                rows.append(([source, role, (str(r), "mono"), "", ""], ""))
    return rows


def _kv(
    prov: dict[str, Any], options: dict[str, Any] | None = None
) -> list[tuple[list[Cell], str]]:
    rows: list[tuple[list[Cell], str]] = []
    if prov.get("software") or prov.get("version"):
        rows.append(
            (["software", f"{prov.get('software', 'driftband')} {prov.get('version', NA)}"], "")
        )
    for key in ("date", "seed"):
        if key in prov:
            rows.append(([key, str(prov[key])], ""))
    if prov.get("command"):
        cmd = prov["command"]
        rows.append(
            (
                [
                    "command",
                    (" ".join(map(str, cmd)) if isinstance(cmd, list) else str(cmd), "mono"),
                ],
                "",
            )
        )
    opts = dict(prov.get("options") or {})
    opts.update(options or {})
    for k, v in opts.items():
        rows.append(([f"option {k}", (json.dumps(v) if not isinstance(v, str) else v, "mono")], ""))
    env = prov.get("environment") or {}
    if env:
        rows.append((["environment", ", ".join(f"{k} {v}" for k, v in env.items())], ""))
    return rows


def _sites_rows(view: ReportView) -> list[tuple[list[Cell], str]]:
    rows: list[tuple[list[Cell], str]] = []
    for key, doc in view.spectra_docs.items():
        prov = doc.get("provenance") or {}
        cs = prov.get("callable_sites") or {}
        src = str(cs.get("source") or "")
        where = CALLABLE_SOURCES.get(src, "not recorded (an older spectra file)")
        if cs:
            where += f"; {fint(cs.get('monomorphic_records'))} monomorphic records"
        pol = sorted({str(p.get("polarisation")) for p in doc["populations"].values()})
        dropped = (prov.get("counts") or {}).get("dropped_sites") or {}
        drop = "; ".join(
            f"{r}: " + ", ".join(f"{c} {fint(n)}" for c, n in per.items())
            for r, per in dropped.items()
        )
        rows.append(
            ([key, where, ", ".join(pol), drop or "none"], "bad" if cs.get("warning") else "")
        )
    return rows


def _provenance(view: ReportView) -> str:
    out = ['<section id="provenance"><h2>Inputs and provenance</h2>']
    out.append(_table("prov-report", "This report", ["Item", "Value"], _kv(view.provenance)))
    out.append(
        _table(
            "prov-fit",
            "The fit (from the fit file)",
            ["Item", "Value"],
            _kv(view.fit_provenance, view.options),
        )
    )
    if view.spectra_docs:
        out.append(
            _table(
                "prov-sites",
                "Callable sites and polarisation (from the spectra files)",
                ["Spectra", "Callable sites", "Polarisation", "Dropped sites"],
                _sites_rows(view),
            )
        )
        made = [
            ([key, item, value], "")
            for key, doc in view.spectra_docs.items()
            for item, value in spectra_made_rows(doc)
        ]
        out.append(
            _table(
                "prov-spectra",
                "How the spectra were made (options, projection, blocks, what was dropped)",
                ["Spectra", "Item", "Value"],
                made,
            )
        )
    files = _files(view.provenance, "report")
    files += _files(view.fit_provenance, "fit")
    for key, doc in view.spectra_docs.items():
        prov = doc.get("provenance") or {}
        files += _files(prov, f"spectra {key}")
    out.append(
        _table(
            "files",
            "Input files with SHA-256 checksums",
            ["Recorded by", "Role", "Path", "Bytes", "SHA-256"],
            files,
        )
    )
    blob = {
        "report": view.provenance,
        "fit": view.fit_provenance,
        "fit_options": view.options,
        "spectra": {k: d.get("provenance") for k, d in view.spectra_docs.items()},
    }
    text = json.dumps(blob, indent=1, sort_keys=True, default=str)
    text = text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
    out.append(f'<script type="application/json" id="driftband-provenance">{text}</script>')
    out.append("</section>")
    return "\n".join(out)


def _conventions_cautions(effect: str) -> str:
    out = ['<section id="conventions"><h2>Conventions</h2><ul>']
    out += [f"<li>{esc(c)}</li>" for c in conventions(effect)]
    out.append("</ul></section>")
    out.append('<section id="cautions"><h2>Cautions</h2><dl class="cautions">')
    for title, text in CAUTIONS:
        out.append(f"<dt>{esc(title)}</dt><dd>{esc(text)}</dd>")
    out.append("</dl></section>")
    out.append('<section id="references"><h2>References</h2><ul class="references">')
    out += [f"<li>{esc(r)}</li>" for r in REFERENCES]
    out.append("</ul></section>")
    return "\n".join(out)


def render_html(view: ReportView) -> str:
    """The whole HTML document of a :class:`ReportView`."""
    names = ", ".join(v.name for v in view.populations)
    prov = view.provenance
    nav = ['<a href="#answer">Answer</a>', '<a href="#comparisons">Comparisons</a>']
    nav += [f'<a href="#{esc(v.anchor)}">{esc(v.name)}</a>' for v in view.populations]
    nav += [
        '<a href="#provenance">Provenance</a>',
        '<a href="#conventions">Conventions</a>',
        '<a href="#cautions">Cautions</a>',
        '<a href="#references">References</a>',
    ]
    sub = (
        f"Populations: {names}. Report made {prov.get('date', NA)} by "
        f"{prov.get('software', 'driftband')} {prov.get('version', '')}."
    )
    body = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>driftband report: {esc(names)}</title>",
        f"<style>{CSS}</style>",
        "</head>",
        "<body>",
        "<main>",
        "<h1>Effectively neutral share of new mutations</h1>",
        f'<p class="sub">{esc(sub)}</p>',
        "<nav>" + "".join(nav) + "</nav>",
        _answer(view),
        _comparisons(view),
        *(_population(v, view) for v in view.populations),
        _provenance(view),
        _conventions_cautions(view.effect),
        "</main>",
        "</body>",
        "</html>",
        "",
    ]
    return "\n".join(body)
