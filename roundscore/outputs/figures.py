"""Figures of the round report: matplotlib (headless, no pyplot), written as SVG once and marked per lab cheaply.

What all labs share is drawn once per measurand: the ranked bar chart of the
scores, the kernel density of the results, the Youden plots, Mandel's h and k,
the homogeneity item means and the two sets of the stability check. Every
figure keeps the affine map from data coordinates to SVG user units, so a
lab's own version is the shared SVG with a small overlay group added (its bar
outlined, its result marked) by string composition: no second matplotlib
call, a few microseconds per lab.

The SVG is reproducible: a fixed ``svg.hashsalt``, no date in the metadata,
text as ``<text>`` elements (``svg.fonttype = "none"``), and every element id
prefixed with the figure's key so many figures can sit in one HTML page.
Colour never carries meaning alone: each signal has its Okabe–Ito colour
(:mod:`roundscore.outputs.look`), a marker shape and its word in the legend.

Figures only draw what the evaluation computed; the kernel density curve and
the Youden ellipse are display devices (documented in their functions), not
statistics of the evaluation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from collections.abc import Sequence
from typing import Literal, overload

import numpy as np
import pandas as pd

from roundscore.outputs.axes import axis_limit, data_span, drawable, span
from roundscore.outputs.figure_base import (MAX_BARS, PROFILE_POINTS, SQUARE, SVG_HASHSALT, WIDE, MarkKind, SvgFigure,
                                            codes_under_axis, finish_figure, legend, new_figure, png_bytes,
                                            signal_legend, step_columns)
from roundscore.outputs.figures_precision import (MANDEL_STATISTICS, StabilityPlot, homogeneity_figure, mandel_figure,
                                                  mandel_limits, stability_figure)
from roundscore.model.scores import SCORE_FIELD, family_of, score_label
from roundscore.model.evaluation import STATE_SIDE
from roundscore.model.signals import SCORED_SIGNALS, SIGNALS
from roundscore.outputs.look import LIMIT_LINE, PALETTE, SIGNAL_COLOUR, SIGNAL_MARKER, SIGNAL_WORD

__all__ = ["SvgFigure", "MarkKind", "z_bar_figure", "density_figure", "youden_figure", "mandel_figure",
           "homogeneity_figure", "stability_figure", "RoundFigures", "round_figures", "SCORE_FIELD",
           "SVG_HASHSALT", "MAX_BARS", "KDE_BANDWIDTH_FACTOR", "YOUDEN_LEVEL", "RANGE_SIGMAS", "mandel_limits"]

#: Kernel bandwidth h = 0.75·σ_pt for the density of results (from memory: AMC Technical Brief 4 and
#: ISO 13528:2015 §10.3 suggest a bandwidth of the order of σ_pt); Silverman's rule when σ_pt is not set.
KDE_BANDWIDTH_FACTOR = 0.75
#: Coverage of the Youden plot's ellipse (common practice: 95 %).
YOUDEN_LEVEL = 0.95
#: Axes show x_pt ± RANGE_SIGMAS·σ_pt at most; results outside are counted in the caption (common practice).
RANGE_SIGMAS = 6.0


def _limits(score: str) -> list[tuple[float, str, str]]:
    """(limit, "warning limit" / "action limit", line style) of the score's family (roundscore.model.scores)."""
    return [(lim, f"{sig} limit", LIMIT_LINE[sig]["matplotlib"]) for lim, sig in family_of(score).limits()]


# --------------------------------------------------------------------------------------------- figures

def z_bar_figure(labs: Sequence[str], values: Sequence[float], signals: Sequence[str], *, key: str,
                 title: str, score: str = "z", words: str = "signals", png: bool = False) -> SvgFigure | bytes:
    """Ranked bar chart of one measurand's scores with the warning and action limits.

    Parameters
    ----------
    labs, values, signals : sequences of equal length
        Lab codes, their official score and signal (from the evaluation);
        labs without a finite score are left out of the chart.
    key, title : str
    score : str
        The score's name ("z", "z-prime", "zeta", "en"): En shows ±1, the
        others ±2 (warning) and ±3 (action) (ISO 13528 §9.4 and §9.7).
    words : {"signals", "performance"}
        The signal words of the legend.

    Returns
    -------
    SvgFigure
        ``kind="bar"``; marks hold each lab's rank position and score.

    Notes
    -----
    Up to :data:`MAX_BARS` labs each bar carries the lab's code; with more,
    the ranked scores are drawn as a profile filled per signal and only
    warning and action signals get a marker. Scores beyond the axis are drawn
    to its edge with their value printed.
    """
    v = np.asarray(values, dtype=float)
    keep = ~np.isnan(v)  # −inf / +inf: a censored false negative / positive, drawn at the axis' end
    labs_k = [lab for lab, k in zip(labs, keep) if k]
    sig = np.asarray(signals, dtype=object)[keep]
    v = v[keep]
    order = np.argsort(v, kind="stable")
    v, sig = v[order], sig[order]
    labs_k = [labs_k[i] for i in order]
    n = len(v)
    lims = _limits(score)
    # the value axis of every score chart (outputs/axes.py): a gross error does not widen it past the bulk
    bound = axis_limit(v[np.isfinite(v)].tolist(), family_of(score))
    fig, ax = new_figure(WIDE, bottom=0.2 if n <= MAX_BARS else 0.1)
    pos = np.arange(n, dtype=float)
    shown = np.clip(v, -bound, bound)
    colours = [SIGNAL_COLOUR.get(s, PALETTE["grey"]) for s in sig]
    if n <= MAX_BARS:
        ax.bar(pos, shown, width=0.8, color=colours, edgecolor="#333333", linewidth=0.3)
        marked = np.ones(n, dtype=bool)
        codes_under_axis(ax, pos, labs_k, n, "laboratory (ranked by score)")
    else:
        # The sorted scores sampled at PROFILE_POINTS positions plus every change of signal: the same
        # picture at screen resolution, a file of bounded size.
        change = np.flatnonzero(sig[1:] != sig[:-1])
        idx = np.unique(np.concatenate([np.linspace(0, n - 1, PROFILE_POINTS).round().astype(int),
                                        change, change + 1]))
        step_columns(ax, pos[idx], 0.0, shown[idx], [SIGNAL_COLOUR.get(s, PALETTE["grey"]) for s in sig[idx]])
        marked = sig != "acceptable"
        ax.set_xlabel(f"{n} laboratories ranked by score")
        ax.set_xticks([])
    for s in SCORED_SIGNALS:
        sel = (sig == s) & marked
        if sel.any():
            tips = shown[sel] + np.where(shown[sel] >= 0, 0.04, -0.04) * bound
            ax.plot(pos[sel], tips, linestyle="none", marker=SIGNAL_MARKER[s], markersize=5 if n <= MAX_BARS else 4,
                    markerfacecolor=SIGNAL_COLOUR[s], markeredgecolor="#000000", markeredgewidth=0.5)
    for i in np.flatnonzero(np.abs(v) > bound):
        ax.annotate(f"{v[i]:.2f}" if np.isfinite(v[i]) else ("false negative" if v[i] < 0 else "false positive"),
                    (pos[i], shown[i]),
                    xytext=(0, 6 if v[i] > 0 else -12),
                    textcoords="offset points", ha="center", fontsize=7)
    for lim, word, style in lims:
        for sign in (1, -1):
            ax.axhline(sign * lim, color="#444444", linestyle=style, linewidth=0.8)
        ax.text(1.0, lim, f" {word} ±{lim:g}", transform=ax.get_yaxis_transform(), va="center", fontsize=7)
    ax.axhline(0, color="#000000", linewidth=0.6)
    ax.set_xlim(-0.8, max(n, 1) - 0.2)
    ax.set_ylim(-bound - 0.6, bound + 0.6)
    ax.set_ylabel(score_label(score))
    ax.set_title(title, loc="left")
    signal_legend(ax, list(sig), words, loc="upper left", ncol=3)
    if png:
        return png_bytes(fig)
    marks = {lab: (float(p), float(z)) for lab, p, z in zip(labs_k, pos, shown)}
    caption = (f"{score_label(score)} of {n} laboratories, ranked; lines at the "
               + " and ".join(f"{w} ±{lim:g}" for lim, w, _ in lims)
               + ". Colour, marker shape and the legend word show each signal."
               + (" A censored result whose limit is beyond the action limit (a false negative or positive) "
                  "has no score value: it is drawn at the axis' end, marked censored." if np.isinf(v).any() else ""))
    return finish_figure(fig, ax, key=key, title=title, caption=caption, kind="bar", marks=marks)


def density_figure(labs: Sequence[str], values: Sequence[float], *, assigned: float, sigma_pt: float, key: str,
                   title: str, unit: str = "", used: Sequence[bool] | None = None,
                   png: bool = False) -> SvgFigure | bytes:
    """Kernel density of the lab results with a rug, x_pt and x_pt ± 2σ_pt marked.

    Parameters
    ----------
    labs, values : sequences
        Lab codes and their results (lab means); non-finite values are skipped.
    assigned, sigma_pt : float
        From the evaluation (NaN: not drawn).
    used : sequence of bool, optional
        Which results entered the statistics; the density uses those, the
        rug shows all (left-out results hollow).

    Notes
    -----
    Gaussian kernels of bandwidth h = :data:`KDE_BANDWIDTH_FACTOR`·σ_pt
    (Silverman's rule via :class:`scipy.stats.gaussian_kde` when σ_pt is
    not set). A second mode often means a method group. The axis shows at
    most x_pt ± :data:`RANGE_SIGMAS`·σ_pt; results outside are counted in the
    caption. The curve is a picture of the data, not a statistic of the
    evaluation.

    References
    ----------
    .. [1] ISO 13528:2015, §10.3 (kernel density plots); clause from memory.
    .. [2] AMC Technical Brief No. 4, "Representing data distributions with
       kernel density estimates" (Royal Society of Chemistry); from memory.
    """
    x = np.asarray(values, dtype=float)
    u = np.ones(len(x), dtype=bool) if used is None else np.asarray(used, dtype=bool)
    ok = np.isfinite(x)
    labs_k = [lab for lab, k in zip(labs, ok) if k]
    x, u = x[ok], u[ok]
    fig, ax = new_figure(WIDE, right=0.97)
    have_pt = drawable(assigned, sigma_pt, RANGE_SIGMAS)
    xu = x[u]
    if have_pt:
        lo, hi = assigned - RANGE_SIGMAS * sigma_pt, assigned + RANGE_SIGMAS * sigma_pt
        if len(xu):
            lo, hi = max(lo, min(xu.min(), assigned - 3 * sigma_pt) - 0.5 * sigma_pt), \
                min(hi, max(xu.max(), assigned + 3 * sigma_pt) + 0.5 * sigma_pt)
    elif len(xu):
        half_span = float(xu.max()) / 2 - float(xu.min()) / 2 or abs(float(xu[0])) / 2 or 0.5  # no overflow
        lo, hi = float(xu.min()) - 0.6 * half_span, float(xu.max()) + 0.6 * half_span
    else:
        lo, hi = 0.0, 1.0
    lo, hi = span(lo, hi)
    mid, half = lo / 2 + hi / 2, hi / 2 - lo / 2  # finite for any finite limits, unlike hi − lo
    grid = mid + half * np.linspace(-1.0, 1.0, 300)
    outside = int(np.sum((x < lo) | (x > hi)))
    ymax = 1.0
    if len(xu) >= 2 and xu.max() > xu.min():
        # In coordinates centred on the axis and scaled by its half-width: the same curve up to the scale of
        # the density axis (which has no ticks), and no overflow or underflow for any finite results.
        from scipy import stats as sps  # here, not at import: scipy.stats takes about a second to load
        with np.errstate(over="ignore", invalid="ignore"):  # far tails: exp(−u²/2) is 0 either way
            gs, xs = (grid - mid) / half, (xu - mid) / half
            xs = xs[np.isfinite(xs)]
            if have_pt:
                h = KDE_BANDWIDTH_FACTOR * sigma_pt / half
                dens = sps.norm.pdf((gs[:, None] - xs[None, :]) / h).sum(axis=1) / (max(len(xs), 1) * h)
            elif len(xs) >= 2 and np.ptp(xs) > 0:
                dens = sps.gaussian_kde(xs, bw_method="silverman")(gs)
            else:
                dens = np.zeros(len(gs))
        ax.fill_between(grid, dens, color=PALETTE["sky"], alpha=0.35, linewidth=0)
        ax.plot(grid, dens, color=PALETTE["blue"], linewidth=1.4, label="kernel density")
        ymax = float(dens.max()) or 1.0
    if have_pt:
        ax.axvspan(assigned - 2 * sigma_pt, assigned + 2 * sigma_pt, color="#000000", alpha=0.06, linewidth=0)
        for k, style in ((-2, "--"), (2, "--")):
            ax.axvline(assigned + k * sigma_pt, color="#444444", linestyle=style, linewidth=0.8)
        ax.axvline(assigned, color="#000000", linewidth=1.2, label="assigned value x_pt")
        ax.text(assigned + 2 * sigma_pt, 1.0, " +2σ_pt", transform=ax.get_xaxis_transform(), fontsize=7, va="top")
        ax.text(assigned - 2 * sigma_pt, 1.0, "−2σ_pt ", transform=ax.get_xaxis_transform(), fontsize=7, va="top",
                ha="right")
    inside = (x >= lo) & (x <= hi)
    rug, rug_out = x[inside & u], x[inside & ~u]
    y_rug = -0.06 * ymax
    if len(rug):
        # At most one tick per 0.4 pt: identical positions are drawn once (same picture, smaller file).
        step = half / 600
        rug = np.unique(np.round(rug / step)) * step
        ax.plot(rug, np.full(len(rug), y_rug), linestyle="none", marker="|", markersize=9, color="#000000",
                markeredgewidth=0.8, label="results (rug)")
    if len(rug_out):
        ax.plot(rug_out, np.full(len(rug_out), y_rug), linestyle="none", marker="o", markersize=4,
                markerfacecolor="none", markeredgecolor=PALETTE["vermillion"], label="left out of the statistics")
    ax.set_xlim(lo, hi)
    ax.set_ylim(-0.14 * ymax, 1.12 * ymax)
    ax.set_yticks([])
    ax.set_ylabel("density")
    ax.set_xlabel(f"result ({unit})" if unit else "result")
    ax.set_title(title, loc="left")
    legend(ax, frameon=False, fontsize=8, loc="upper right")
    if png:
        return png_bytes(fig)
    caption = (f"Kernel density of {int(u.sum())} results used (bandwidth "
               + (f"{KDE_BANDWIDTH_FACTOR:g}·σ_pt" if have_pt else "Silverman's rule")
               + "), each result as a rug tick; the assigned value and x_pt ± 2σ_pt marked. "
               "A second mode often means a method group.")
    if outside:
        caption += f" {outside} result(s) lie outside the plotted range."
    marks = {lab: (float(v), math.nan) for lab, v in zip(labs_k, x)}
    return finish_figure(fig, ax, key=key, title=title, caption=caption, kind="vline", marks=marks)


@overload
def youden_figure(labs: Sequence[str], a: Sequence[float], b: Sequence[float], *, names: tuple[str, str],
                  assigned: tuple[float, float], sigma_pt: tuple[float, float], key: str, title: str,
                  signals: Sequence[str] | None = None, words: str = "signals",
                  png: Literal[False] = False) -> SvgFigure: ...
@overload
def youden_figure(labs: Sequence[str], a: Sequence[float], b: Sequence[float], *, names: tuple[str, str],
                  assigned: tuple[float, float], sigma_pt: tuple[float, float], key: str, title: str,
                  signals: Sequence[str] | None = None, words: str = "signals",
                  png: Literal[True]) -> bytes: ...
def youden_figure(labs: Sequence[str], a: Sequence[float], b: Sequence[float], *, names: tuple[str, str],
                  assigned: tuple[float, float], sigma_pt: tuple[float, float], key: str, title: str,
                  signals: Sequence[str] | None = None, words: str = "signals",
                  png: bool = False) -> SvgFigure | bytes:
    """Youden plot: each lab's result on measurand (or item) A against B, assigned values crossed.

    Parameters
    ----------
    labs, a, b : sequences
        Lab codes and results on both; labs without both are left out.
    names, assigned, sigma_pt : pairs
        Axis names and the evaluation's x_pt and σ_pt of each.
    signals : sequence of str, optional
        The worse of each lab's two signals (marker colour and shape).

    Notes
    -----
    The ellipse is centred on the two assigned values; in units of σ_pt it
    is the :data:`YOUDEN_LEVEL` contour of a bivariate normal with unit
    variances and the correlation of the standardised results of labs
    within ±3σ_pt on both (a display device, assumed here; the evaluation
    does not use it). Points along the 45° line (in σ_pt units) show
    systematic errors common to both, points across it random error.

    References
    ----------
    .. [1] W. J. Youden, "Graphical diagnosis of interlaboratory test
       results", Industrial Quality Control 15 (1959) 24-28; from memory.
    .. [2] ISO 13528:2015, §10.5 (Youden plots); clause from memory.
    """
    xa, xb = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    ok = np.isfinite(xa) & np.isfinite(xb)
    sig = np.asarray(signals if signals is not None else ["acceptable"] * len(xa), dtype=object)[ok]
    labs_k = [lab for lab, k in zip(labs, ok) if k]
    xa, xb = xa[ok], xb[ok]
    fig, ax = new_figure(SQUARE, left=0.11, right=0.70, bottom=0.12, top=0.92)
    (ca, cb), (sa, sb) = assigned, sigma_pt
    have = drawable(ca, sa, RANGE_SIGMAS) and drawable(cb, sb, RANGE_SIGMAS)
    if have:
        za, zb = (xa - ca) / sa, (xb - cb) / sb
        core = (np.abs(za) <= 3) & (np.abs(zb) <= 3)
        rho = float(np.corrcoef(za[core], zb[core])[0, 1]) if core.sum() >= 3 else 0.0
        rho = 0.0 if not np.isfinite(rho) else max(min(rho, 0.99), -0.99)
        from scipy import stats as sps  # here, not at import: scipy.stats takes about a second to load
        r2 = float(sps.chi2.ppf(YOUDEN_LEVEL, 2))
        t = np.linspace(0, 2 * np.pi, 181)
        vals, vecs = np.linalg.eigh(np.array([[1.0, rho], [rho, 1.0]]))
        pts = vecs @ (np.sqrt(vals * r2)[:, None] * np.vstack([np.cos(t), np.sin(t)]))
        ax.plot(ca + sa * pts[0], cb + sb * pts[1], color=PALETTE["blue"], linewidth=1.1,
                label=f"{YOUDEN_LEVEL:.0%} ellipse")
        lim_a = (ca - RANGE_SIGMAS * sa, ca + RANGE_SIGMAS * sa)
        lim_b = (cb - RANGE_SIGMAS * sb, cb + RANGE_SIGMAS * sb)
        ax.plot(lim_a, (cb - RANGE_SIGMAS * sb, cb + RANGE_SIGMAS * sb), color="#888888", linewidth=0.6,
                linestyle=":", label="45° line (σ_pt units)")
        ax.axvline(ca, color="#000000", linewidth=0.9)
        ax.axhline(cb, color="#000000", linewidth=0.9, label="assigned values")
        span_a = (max(lim_a[0], min(xa.min(initial=ca), ca - 3 * sa) - 0.5 * sa),
                  min(lim_a[1], max(xa.max(initial=ca), ca + 3 * sa) + 0.5 * sa))
        span_b = (max(lim_b[0], min(xb.min(initial=cb), cb - 3 * sb) - 0.5 * sb),
                  min(lim_b[1], max(xb.max(initial=cb), cb + 3 * sb) + 0.5 * sb))
        span_a, span_b = span(*span_a), span(*span_b)
        ax.set_xlim(*span_a)
        ax.set_ylim(*span_b)
        cx, cy = np.clip(xa, *span_a), np.clip(xb, *span_b)
    else:
        span_a, span_b = data_span(xa), data_span(xb)
        ax.set_xlim(*span_a)
        ax.set_ylim(*span_b)
        cx, cy = np.clip(xa, *span_a), np.clip(xb, *span_b)
    for s in SIGNALS:
        sel = sig == s
        if sel.any():
            ax.plot(cx[sel], cy[sel], linestyle="none", marker=SIGNAL_MARKER[s], markersize=5,
                    markerfacecolor=SIGNAL_COLOUR[s], markeredgecolor="#000000", markeredgewidth=0.5,
                    label=SIGNAL_WORD[words][s])
    ax.set_xlabel(names[0])
    ax.set_ylabel(names[1])
    ax.set_title(title, loc="left")
    legend(ax, frameon=False, fontsize=8, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0)
    if png:
        return png_bytes(fig)
    caption = (f"Youden plot of {len(xa)} laboratories: {names[0]} against {names[1]}, the assigned values "
               f"crossed, a {YOUDEN_LEVEL:.0%} ellipse. Points along the 45° line suggest a systematic error "
               "common to both. Results beyond the axes are drawn at its edge.")
    marks = {lab: (float(p), float(q)) for lab, p, q in zip(labs_k, xa, xb)}
    return finish_figure(fig, ax, key=key, title=title, caption=caption, kind="point", marks=marks)


# --------------------------------------------------------------------------------------------- the round's set

#: Signals from least to most serious (a Youden point shows the worse of its two).
_WORSE = {n: s.rank for n, s in SIGNALS.items()}


@dataclass(frozen=True, slots=True, kw_only=True)
class RoundFigures:
    """Every shared figure of a round, drawn once (the HTML report and each lab's page compose them).

    Attributes
    ----------
    scores, density : dict of str to SvgFigure
        By measurand: the ranked score chart and the density of results (scored measurands only).
    youden : tuple of SvgFigure
        One per pair in ``[round] youden``.
    mandel : dict of str to tuple of SvgFigure
        By measurand: Mandel's h and k charts (when the mandel table is there).
    items : dict of str to SvgFigure
        By measurand: the homogeneity item means.
    stability : dict of str to SvgFigure
        By measurand: the two sets of the stability check (empty by default).
    """

    scores: dict[str, SvgFigure]
    density: dict[str, SvgFigure]
    youden: tuple[SvgFigure, ...]
    mandel: dict[str, tuple[SvgFigure, ...]]
    items: dict[str, SvgFigure]
    stability: dict[str, SvgFigure] = field(default_factory=dict)


#: Most measurands for which the per-measurand figures (ranked scores, distribution, Mandel h and k,
#: item checks) are drawn. Each costs about 0.35 s of drawing and 50-700 KB of the report; past this the
#: report shows each measurand's score strip instead and says so (measured: benchmarks/measurands.py).
FIGURES_MAX_MEASURANDS = 100


def figures_per_measurand(n_measurands: int) -> bool:
    """Whether a round of ``n_measurands`` gets the per-measurand figures (:data:`FIGURES_MAX_MEASURANDS`)."""
    return n_measurands <= FIGURES_MAX_MEASURANDS


def round_figures(ev, *, jobs: int | None = 1, progress=None) -> RoundFigures:
    """Draw the shared figures of a :class:`~roundscore.model.evaluation.RoundEvaluation` (nothing is recomputed).

    Parameters
    ----------
    ev : RoundEvaluation
    jobs : int or None
        Worker processes for the drawing (one figure costs about 0.1 s; 1 =
        here; None = all cores). The figures do not depend on it.
    progress : callable, optional
        ``progress("figures", done, total)``.

    Notes
    -----
    Mandel indicator lines come from the mandel frame's ``attrs["critical"]``
    (``{measurand: {"h_5", "h_1", "k_5", "k_1"}}``) or its columns
    ``h_crit_5, h_crit_1, k_crit_5, k_crit_1`` (as the precision stage writes
    them), otherwise from :func:`mandel_limits` with p the labs
    having h (k) and n the measurand's mean replicate count from the
    precision table (rounded; the round's ``replicates`` when absent).
    """
    from matplotlib.backends import backend_svg  # noqa: F401  imported before the workers fork (~0.5 s each)

    from roundscore.support.parallel import run_batches

    per_measurand = figures_per_measurand(len(ev.measurands))
    tasks: list[tuple[str, ...]] = [("measurand", n) for n in ev.measurands] if per_measurand else []
    tasks += [("youden", a, b) for a, b in ev.round.youden if a in ev.measurands and b in ev.measurands]
    mandel = ev.extras.get("mandel")
    if (per_measurand and mandel is not None and len(mandel)
            and {"lab", "measurand", "h", "k"} <= set(mandel.columns)):
        tasks += [("mandel", n) for n in dict.fromkeys(mandel["measurand"])]
    for table in ("scores", "mandel", "precision"):  # split by measurand once, before the workers fork
        if table == "scores" or "measurand" in getattr(ev.extras.get(table), "columns", ()):
            ev.measurand_rows(table, "")
    drawn = run_batches(_draw_batch, tasks, jobs=jobs, shared=ev, batch_size=1, progress=progress,
                        stage="figures")
    scores: dict[str, SvgFigure]
    density: dict[str, SvgFigure]
    items: dict[str, SvgFigure]
    stab: dict[str, SvgFigure]
    scores, density, items, stab, youden, mandel_figs = {}, {}, {}, {}, [], {}
    for task, figs in zip(tasks, drawn):
        if task[0] == "measurand":
            for kind, target in (("scores", scores), ("density", density), ("items", items), ("stability", stab)):
                if kind in figs:
                    target[task[1]] = figs[kind]
        elif task[0] == "youden":
            youden.append(figs["youden"])
        else:
            mandel_figs[task[1]] = figs["mandel"]
    return RoundFigures(scores=scores, density=density, youden=tuple(youden), mandel=mandel_figs, items=items,
                        stability=stab)


def _draw_batch(tasks: Sequence[tuple[str, ...]]) -> list[dict]:
    from roundscore.support.parallel import shared

    ev = shared()
    return [_draw(ev, task) for task in tasks]


def _draw(ev, task: tuple[str, ...]) -> dict:
    words = ev.round.words
    if task[0] == "youden":
        return {"youden": _youden(ev, task[1], task[2])}
    name = task[1]
    if task[0] == "mandel":
        return {"mandel": _mandel(ev, name)}
    m = ev.measurands[name]
    out: dict = {}
    label = m.settings.label or name
    g = ev.measurand_rows("scores", name)
    if m.scored and len(g):
        values = g[SCORE_FIELD[m.settings.score]].to_numpy(float)
        if "state" in g.columns:  # a censored false negative (positive) has its signal, not a value
            side = g["state"].map(STATE_SIDE).fillna(0).to_numpy(float)
            values = np.where(side < 0, -np.inf, np.where(side > 0, np.inf, values))
        out["scores"] = z_bar_figure(g["lab"].tolist(), values,
                                     g["signal"].tolist(), key=f"z-{name}", score=m.settings.score,
                                     title=f"{label}: {score_label(m.settings.score)} by laboratory", words=words)
    labs = m.labs
    if len(labs) and np.isfinite(labs["mean"].to_numpy(float)).any():
        out["density"] = density_figure(labs["lab"].tolist(), labs["mean"].to_numpy(float), assigned=m.assigned,
                                        sigma_pt=m.sigma_pt, key=f"d-{name}", unit=m.settings.unit,
                                        title=f"{label}: distribution of results", used=labs["used"].to_numpy(bool))
    ic = m.item_checks
    hom = getattr(ic, "homogeneity", None)
    table = getattr(ic, "homogeneity_table", None)
    if hom is not None and table is not None:
        out["items"] = homogeneity_figure(list(table.items), np.asarray(table.values, float),
                                          item_labels=list(hom.item_labels), item_means=list(hom.item_means),
                                          general_mean=float(hom.mean), sigma_pt=float(hom.sigma_pt),
                                          key=f"items-{name}", title=f"{label}: homogeneity of the test items",
                                          unit=m.settings.unit)
    stab = getattr(ic, "stability", None)
    table = getattr(ic, "stability_table", None)
    names = getattr(ic, "stability_sets", None)
    if stab is not None and table is not None and table.sets is not None:
        names = names or (table.set_names[0], table.set_names[1])
        plot = StabilityPlot.of(stab, sets=table.sets, values=table.values, items=table.items, set_labels=names,
                                unit=m.settings.unit)
        out["stability"] = stability_figure(plot, key=f"stability-{name}",
                                            title=f"{label}: stability of the test items")
    return out


def _youden(ev, a: str, b: str) -> SvgFigure:
    ma, mb = ev.measurands[a], ev.measurands[b]
    la, lb = ma.labs.set_index("lab"), mb.labs.set_index("lab")
    codes = [lab for lab in la.index if lab in lb.index]
    sig: dict[str, str] = {}
    for name in (a, b):
        g = ev.measurand_rows("scores", name)
        for lab, s in zip(g["lab"], g["signal"]):
            if _WORSE.get(s, 0) >= _WORSE.get(sig.get(lab, "not-scored"), 0):
                sig[lab] = s
    return youden_figure(
        codes, la.loc[codes, "mean"].to_numpy(float), lb.loc[codes, "mean"].to_numpy(float),
        names=(f"{ma.settings.label or a} ({ma.settings.unit})", f"{mb.settings.label or b} ({mb.settings.unit})"),
        assigned=(ma.assigned, mb.assigned), sigma_pt=(ma.sigma_pt, mb.sigma_pt), key=f"y-{a}-{b}",
        title=f"Youden plot: {a} and {b}", signals=[sig.get(c, "not-scored") for c in codes], words=ev.round.words)


def _mandel(ev, name: str) -> tuple[SvgFigure, ...]:
    frame = ev.extras["mandel"]
    g = ev.measurand_rows("mandel", name)
    critical = frame.attrs.get("critical", {}) if isinstance(frame.attrs, dict) else {}
    h, k = g["h"].to_numpy(float), g["k"].to_numpy(float)
    lim = dict(critical.get(name, {}))
    cols = {"h_5": "h_crit_5", "h_1": "h_crit_1", "k_5": "k_crit_5", "k_1": "k_crit_1"}
    if not lim and set(cols.values()) <= set(g.columns):
        for key, c in cols.items():
            vals = pd.to_numeric(g[c], errors="coerce").dropna()
            lim[key] = float(vals.iloc[0]) if len(vals) else math.nan
    if not lim:
        n = ev.round.replicates
        prec = ev.extras.get("precision")
        if prec is not None and "n_bar" in getattr(prec, "columns", ()):
            row = ev.measurand_rows("precision", name)
            if len(row) and np.isfinite(float(row["n_bar"].iloc[0])):
                n = round(float(row["n_bar"].iloc[0]))
        lim_h = mandel_limits(int(np.isfinite(h).sum()), n)
        lim_k = mandel_limits(int(np.isfinite(k).sum()), n)
        lim = {"h_5": lim_h["h_5"], "h_1": lim_h["h_1"], "k_5": lim_k["k_5"], "k_1": lim_k["k_1"]}
    labs = g["lab"].tolist()
    return tuple(mandel_figure(labs, vals, statistic=stat, critical_5=float(lim.get(f"{stat}_5", math.nan)),
                               critical_1=float(lim.get(f"{stat}_1", math.nan)), key=f"mandel-{stat}-{name}",
                               title=f"{name}: Mandel's {stat} by laboratory")
                 for stat, vals in zip(MANDEL_STATISTICS, (h, k)))
