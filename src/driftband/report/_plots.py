"""The report's figures, drawn with matplotlib and returned as SVG data URIs.

Figures are made with :class:`matplotlib.figure.Figure` directly (no pyplot, so no global
figure state and no GUI backend; rasterisation, where any, is Agg's) and saved as SVG with
fixed metadata and a fixed hash salt, so the same input gives the same bytes. Colours are
the Okabe–Ito colour-blind-safe palette; populations are told apart by hatching as well.
"""

from __future__ import annotations

import base64
import io
import math
from typing import TYPE_CHECKING, Any

import matplotlib
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

from ._text import HATCHES, OKABE_ITO, is_num

if TYPE_CHECKING:
    from matplotlib.typing import RcKeyType

__all__ = ["bands_figure", "history_figure", "spectra_figure"]

_RC: dict[RcKeyType, Any] = {
    "svg.fonttype": "path",  # text as paths: the same look in every browser
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.titlesize": 9.5,
    "axes.labelsize": 9.0,
    "legend.fontsize": 8.5,
    "legend.frameon": False,
}


def _label(text: str) -> str:
    """Text from a file made safe for matplotlib (no mathtext from a stray ``$``)."""
    return str(text).replace("$", r"\$")


def _to_data_uri(fig: Figure, salt: str) -> str:
    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": f"driftband-{salt}"}):
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": "driftband"})
    return "data:image/svg+xml;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def bands_figure(populations: list[dict[str, Any]], selected: str, level_text: str) -> str:
    """Grouped bars of the band shares of every population, with interval bars.

    Parameters
    ----------
    populations : list of dict
        Each with ``name`` (str), ``model`` (str) and ``bands``: a list of
        ``(label_nes, label_S, share, ci_low, ci_high)`` with shares in [0, 1]
        (None where missing).
    selected : str
        Name of the selected class (axis label).
    level_text : str
        Confidence level, e.g. ``95 %`` (legend).

    Returns
    -------
    str
        ``data:image/svg+xml;base64,...``
    """
    with matplotlib.rc_context(_RC):
        nb = len(populations[0]["bands"])
        npop = len(populations)
        width = min(0.8 / npop, 0.3)
        fig = Figure(figsize=(max(8.0, 3.2 + nb * (0.45 + 0.3 * npop)), 4.2))
        fig.subplots_adjust(left=0.08, right=0.74, top=0.86, bottom=0.13)
        ax = fig.add_subplot()
        top = 0.0
        for k, pop in enumerate(populations):
            xs = [j + (k - (npop - 1) / 2) * width for j in range(nb)]
            ys = [b[2] if is_num(b[2]) else 0.0 for b in pop["bands"]]
            col = OKABE_ITO[k % len(OKABE_ITO)]
            ax.bar(
                xs,
                ys,
                width * 0.92,
                color=col,
                edgecolor="black",
                linewidth=0.6,
                hatch=HATCHES[k % len(HATCHES)],
                label=_label(f"{pop['name']} ({pop['model']})"),
            )
            lo = [
                (x, b[3], b[4]) for x, b in zip(xs, pop["bands"]) if is_num(b[3]) and is_num(b[4])
            ]
            if lo:
                ax.vlines(
                    [t[0] for t in lo],
                    [t[1] for t in lo],
                    [t[2] for t in lo],
                    colors="black",
                    linewidth=1.1,
                )
                cap = width * 0.22
                for x, a, b in lo:
                    ax.hlines([a, b], x - cap, x + cap, colors="black", linewidth=1.1)
                top = max(top, *(t[2] for t in lo))
            top = max(top, *ys)
        ax.set_xticks(range(nb))
        ax.set_xticklabels([_label(b[0]) for b in populations[0]["bands"]])
        ax.set_xlabel("|Ne\u00b7s| band (effectively neutral: the first, |Ne\u00b7s| < 1)")
        ax.set_ylabel(f"share of new {_label(selected)} mutations (fraction)")
        ax.set_ylim(0.0, min(1.0, top * 1.18 + 0.02) if top > 0 else 1.0)
        ax.set_xlim(-0.6, nb - 0.4)
        sec = ax.secondary_xaxis("top")
        sec.set_xticks(range(nb))
        sec.set_xticklabels([_label(b[1]) for b in populations[0]["bands"]])
        sec.set_xlabel("|S| band, S = 4\u00b7Ne\u00b7s")
        ax.axvspan(-0.5, 0.5, color="#F0E442", alpha=0.18, zorder=0, linewidth=0)
        ax.grid(axis="y", color="#dddddd", linewidth=0.6)
        ax.set_axisbelow(True)
        handles, labels = ax.get_legend_handles_labels()
        handles.append(Line2D([], [], color="black", linewidth=1.1))
        labels.append(f"{level_text} bootstrap interval")
        ax.legend(
            handles,
            labels,
            loc="upper left",
            bbox_to_anchor=(1.02, 1.0),
            title="population (model)",
            alignment="left",
        )
        return _to_data_uri(fig, "bands")


def spectra_figure(
    name: str,
    n: int,
    folded: bool,
    neutral: str,
    selected: str,
    observed: dict[str, list],
    expected: dict[str, list],
    residuals: dict[str, list],
    model: str,
    anchor: str,
) -> str:
    """Observed against expected spectra of both classes, with Pearson residuals below.

    Parameters
    ----------
    name : str
        Population.
    n : int
        Gene copies sampled.
    folded : bool
        Folded spectra (minor-allele counts) or unfolded (derived-allele counts).
    neutral, selected : str
        Class names.
    observed, expected, residuals : dict of str to list of float
        Keys ``neutral`` and ``selected``; counts per polymorphic class (i = 1..n−1, or
        j = 1..n//2 when folded) and Pearson residuals (obs − exp)/√exp.
    model : str
        The model whose expectation is drawn.
    anchor : str
        Unique key (hash salt of the SVG).

    Returns
    -------
    str
        ``data:image/svg+xml;base64,...``
    """
    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=(9.0, 5.4))
        gs = fig.add_gridspec(
            2,
            2,
            height_ratios=(2.3, 1.0),
            hspace=0.12,
            wspace=0.2,
            left=0.09,
            right=0.99,
            top=0.95,
            bottom=0.1,
        )
        xlabel = (
            f"minor-allele count j (folded; of n = {n})"
            if folded
            else f"derived-allele count i (of n = {n})"
        )
        for c, (key, cls) in enumerate((("neutral", neutral), ("selected", selected))):
            obs = [float(v) if is_num(v) else math.nan for v in observed.get(key) or []]
            exp = [float(v) if is_num(v) else math.nan for v in expected.get(key) or []]
            res = [float(v) if is_num(v) else 0.0 for v in residuals.get(key) or []]
            x = list(range(1, len(obs) + 1))
            ax = fig.add_subplot(gs[0, c])
            ax.bar(
                x, obs, 0.75, color="#56B4E9", edgecolor="#0072B2", linewidth=0.6, label="observed"
            )
            if exp:
                ax.plot(
                    list(range(1, len(exp) + 1)),
                    exp,
                    "o-",
                    color="black",
                    markersize=3.5,
                    linewidth=1.1,
                    label=f"expected ({_label(model)})",
                )
            pos = [v for v in obs + exp if is_num(v) and v > 0]
            if pos:
                ax.set_yscale("log")
                ax.set_ylim(min(pos) * 0.5, max(pos) * 2.0)
                ax.yaxis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0)))
                ax.yaxis.set_major_formatter(FuncFormatter(lambda y, _p: f"{y:g}"))
                ax.yaxis.set_minor_formatter(NullFormatter())
            ax.set_title(f"{_label(cls)} ({key}) sites, {_label(name)}")
            ax.set_ylabel("sites (count)" if c == 0 else "")
            ax.tick_params(labelbottom=False)
            ax.legend(loc="upper right")
            ax.grid(axis="y", color="#eeeeee", linewidth=0.5)
            ax.set_axisbelow(True)
            rx = fig.add_subplot(gs[1, c], sharex=ax)
            rx.bar(
                list(range(1, len(res) + 1)),
                res,
                0.75,
                color="#D55E00",
                edgecolor="black",
                linewidth=0.4,
            )
            rx.axhline(0.0, color="black", linewidth=0.6)
            for h in (-2.0, 2.0):
                rx.axhline(h, color="#555555", linewidth=0.6, linestyle="--")
            lim = max([2.5] + [abs(v) * 1.15 for v in res])
            rx.set_ylim(-lim, lim)
            rx.set_xlabel(xlabel)
            rx.set_ylabel("Pearson residual\n(obs \u2212 exp)/\u221aexp" if c == 0 else "")
            step = max(1, len(x) // 12 + (1 if len(x) > 12 else 0))
            rx.set_xticks(x[::step])
        return _to_data_uri(fig, anchor)


def history_curve(epochs: list[list[float]], points: int = 40) -> tuple[list[float], list[float]]:
    """Time before the sample (units of 2 N_anc generations) and size ratio N/N_anc of a
    history given as ``(duration, nu_start, nu_end)`` epochs, oldest first; the ancestral
    size holds before the oldest epoch (drawn for a further quarter of the history's
    span, at least 0.1). Exponential epochs are sampled at ``points`` times."""
    t_end = 0.0
    rows = [(float(d), float(a), float(b)) for d, a, b in epochs]
    # walk from the present back in time
    out_t: list[float] = []
    out_nu: list[float] = []
    for d, a, b in reversed(rows):
        k = points if a != b else 1
        for j in range(k + 1):
            f = j / k
            out_t.append(t_end + f * d)
            out_nu.append(b * (a / b) ** f)
        t_end += d
    span = max(0.1, 0.25 * t_end)
    out_t += [t_end, t_end + span]
    out_nu += [1.0, 1.0]
    return out_t, out_nu


def history_figure(name: str, epochs: list[list[float]], model: str, anchor: str) -> str:
    """The fitted size history of one population: N/N_anc against time before the sample.

    Parameters
    ----------
    name : str
        Population.
    epochs : list of (float, float, float)
        ``(duration, nu_start, nu_end)`` epochs, oldest first (durations in units of
        2 N_anc generations).
    model : str
        The history model (for the title).
    anchor : str
        Unique key (hash salt of the SVG).

    Returns
    -------
    str
        ``data:image/svg+xml;base64,...``
    """
    t, nu = history_curve(epochs)
    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=(4.8, 2.6))
        ax = fig.add_axes((0.15, 0.2, 0.8, 0.68))
        ax.step(t, nu, where="post", color=OKABE_ITO[0], linewidth=1.6)
        ax.set_yscale("log")
        lo, hi = min(nu + [1.0]), max(nu + [1.0])
        ax.set_ylim(lo / 2.0, hi * 2.0)
        ax.yaxis.set_major_formatter(FuncFormatter(lambda y, _p: f"{y:g}"))
        ax.yaxis.set_minor_formatter(NullFormatter())
        ax.set_xlim(max(t), 0.0)  # the present on the right
        ax.set_xlabel("time before the sample (units of 2·N_anc generations)")
        ax.set_ylabel("N / N_anc")
        ax.set_title(f"size history of {_label(name)} ({_label(model)})")
        ax.grid(color="#eeeeee", linewidth=0.5)
        ax.set_axisbelow(True)
        return _to_data_uri(fig, anchor + "-history")
