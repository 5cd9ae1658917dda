"""Comparison plots, in the manner of scikit-learn's Display objects: each function draws on the
``ax`` it is given (or on a new Figure) and returns the Figure; nothing here saves a file except
``save_figure`` or selects a matplotlib backend, so a notebook's or an application's own setup
is never changed. Figures made here are ``matplotlib.figure.Figure`` objects, not pyplot ones:
they need no backend to be drawn and saved, and are freed like any object.""" 
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.text import format_number as fmt
from tabpar.evaluation.reference import Reference, model_gain_shares
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS

# Okabe–Ito colour-blind-safe palette
PALETTE = {"naive": "#999999", "linear": "#CC79A7", "rf": "#009E73", "et": "#56B4E9",
           "hgb": "#E69F00", "xgb": "#0072B2", "lgbm": "#D55E00"}
USER_COLOUR = "#000000"


def new_axes(ax, width: float, height: float, **grid):
    """``(figure, ax)``: the given axes and their figure, or a new Figure of ``width`` x
    ``height`` inches with subplots laid out by ``grid`` (``Figure.subplots`` arguments)."""
    if ax is not None:
        return ax.figure, ax
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=120)
    return fig, fig.subplots(**grid)


def save_figure(fig, path) -> Path:
    """Save ``fig`` as PNG or SVG (by the file's extension); UserError for another extension or
    a path that cannot be written. Returns the path."""
    path = Path(path)
    if path.suffix.lower() not in (".png", ".svg"):
        raise UserError(f"Plot file {path} must end in .png or .svg.")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fig.savefig(path, bbox_inches="tight")
    except OSError as exc:
        raise UserError(f"Cannot write the plot {path} ({exc.strerror}); choose another "
                        f"path.") from None
    return path


def _direction(lower_is_better: bool) -> str:
    return "← better (lower)" if lower_is_better else "better (higher) →"


def placement_plot(placement, ax=None, leaderboard=None, leaderboard_ax=None):
    """Draw a placed score against the task's reference.

    Parameters
    ----------
    placement : Placement
        The answer of ``tabpar.place`` (or of ``calibrate``).
    ax : matplotlib Axes, optional
        Where to draw the reference panel: each model's reference scores (a point per seed),
        the naive floor and the best default as lines, the best default's noise band shaded,
        the placed score marked. A new Figure when None.
    leaderboard : Leaderboard, optional
        Also draw its entries as a ranked curve with the score's rank, on ``leaderboard_ax``
        (or on a second panel of the new Figure when ``ax`` is None).

    Returns
    -------
    matplotlib.figure.Figure
        The figure drawn on; save it with ``save_figure`` or ``fig.savefig``.
    """
    models = [m for m in MODELS if m in placement.reference_scores]
    height = 0.55 * len(models) + 2.2
    if leaderboard is None or ax is not None:
        fig, ax = new_axes(ax, 8, height)
    else:
        fig, (ax, leaderboard_ax) = new_axes(None, 13.5, max(height, 4.0), ncols=2,
                                             gridspec_kw={"width_ratios": [3, 2],
                                                          "wspace": 0.3})
    if leaderboard is not None:
        if leaderboard_ax is None:
            raise ValueError("placement_plot needs leaderboard_ax when ax is given with a "
                             "leaderboard.")
        leaderboard_panel(leaderboard_ax, leaderboard, placement.score)
    lo, hi, floor_shown = _placement_range(placement, models)
    rng = np.random.default_rng(0)
    for i, model in enumerate(models):
        scores = np.asarray(placement.reference_scores[model], float)
        jitter = rng.uniform(-0.12, 0.12, len(scores))
        inside = (scores >= lo) & (scores <= hi)
        ax.scatter(scores[inside], i + jitter[inside], s=36, color=PALETTE.get(model, "#444444"),
                   edgecolor="black", linewidth=0.5, zorder=3)
        if (~inside).any():  # off the scale: a triangle at the edge, the value beside it
            left = scores[~inside].mean() < lo
            edge = lo if left else hi
            ax.scatter([edge], [i], marker="<" if left else ">", s=60,
                       color=PALETTE.get(model, "#444444"), edgecolor="black", linewidth=0.5,
                       zorder=3, clip_on=False)
            ax.annotate(fmt(float(scores[~inside].mean())), (edge, i), xytext=(9 if left else -9, 0),
                        textcoords="offset points", va="center",
                        ha="left" if left else "right", fontsize=8)
    ax.scatter([], [], s=36, color="white", edgecolor="black", linewidth=0.5,
               label="reference runs (one point per seed; ◀ ▶ off the scale)")
    # the band is the uncertainty of the placed score against the best default (paired when
    # predictions were given), so it is drawn around the placed score, not the reference
    ax.axvspan(placement.score - placement.noise, placement.score + placement.noise,
               color="#999999", alpha=0.25, zorder=1,
               label=f"placed score ± noise (95% bootstrap"
                     f"{', paired with the best default' if placement.paired else ''}, "
                     f"±{fmt(placement.noise, 2)})")
    ax.axvline(placement.best, color="#0072B2", linestyle="--", linewidth=1.2, zorder=2,
               label=f"best default: {placement.best_model} {fmt(placement.best)}")
    if floor_shown:
        ax.axvline(placement.naive, color="#999999", linestyle=":", linewidth=1.5, zorder=2,
                   label=f"naive floor {fmt(placement.naive)}")
    else:
        ax.plot([], [], color="#999999", linestyle=":",
                label=f"naive floor {fmt(placement.naive)} (off the scale)")
    ax.axvline(placement.score, color=USER_COLOUR, linewidth=2.2, zorder=4,
               label=f"placed score {fmt(placement.score)} ({placement.verdict})")
    ax.scatter([placement.score], [len(models) - 0.4], marker="v", s=90, color=USER_COLOUR,
               zorder=5)
    ax.set_xlim(lo, hi)
    ax.set_yticks(range(len(models)))
    ax.set_yticklabels(models)
    ax.set_ylim(-0.6, len(models) - 0.1)
    units = f" ({placement.units})" if getattr(placement, "units", "") else ""
    ax.set_xlabel(f"{placement.metric}{units} on the holdout  "
                  f"({_direction(placement.lower_is_better)})")
    ax.set_title(f"{placement.task}: score placed against the baseline reference\n"
                 f"beats {placement.percentile:.0f}% of {placement.n_reference} reference runs · "
                 f"verdict: {placement.verdict}", fontsize=11)
    ax.grid(axis="x", alpha=0.3)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=2, fontsize=8,
              frameon=False)
    findings_note(ax, placement.findings, right=placement.lower_is_better)
    return fig


def _placement_range(placement, models) -> tuple[float, float, bool]:
    """(left, right, naive shown) of the placement plot's axis: the default ensembles, the best
    and the placed score with its band always; the naive floor and other models only when they
    do not squeeze those into a few pixels (within twice their span)."""
    core = [placement.best, placement.score - placement.noise, placement.score + placement.noise]
    core += [v for m in models if m in DEFAULT_ENSEMBLES for v in placement.reference_scores[m]]
    lo, hi = float(np.min(core)), float(np.max(core))
    span = max(hi - lo, 1e-9)
    reach = (lo - 2 * span, hi + 2 * span)
    others = [v for m in models if m not in DEFAULT_ENSEMBLES
              for v in placement.reference_scores[m]] + [placement.naive]
    near = [v for v in others if reach[0] <= v <= reach[1]]
    floor_shown = reach[0] <= placement.naive <= reach[1]
    lo, hi = min([lo] + near), max([hi] + near)
    pad = 0.06 * max(hi - lo, 1e-9)
    return lo - pad, hi + pad, floor_shown


def findings_note(ax, findings, right: bool = True) -> None:
    """The probes' findings on the user's predictions as a small note in an upper corner of
    the panel (the right one when ``right``: the worse end, where the top rows' best models are
    not), most decisive first; nothing when there are none (the text answer has the sentences
    and figures)."""
    if not findings:
        return
    shown = [f"• {f.probe}" for f in findings[:3]]
    if len(findings) > 3:
        shown.append(f"  and {len(findings) - 3} more")
    ax.text(0.99 if right else 0.01, 0.98, "\n".join(["probes on your predictions:"] + shown),
            transform=ax.transAxes, ha="right" if right else "left", va="top", fontsize=7.5,
            zorder=6,
            bbox={"boxstyle": "round,pad=0.4", "facecolor": "#FFF4E0",
                  "edgecolor": "#E69F00"})


def leaderboard_panel(ax, leaderboard, score: float) -> None:
    """A leaderboard's entries as a ranked curve (rank 1 = best at the left), the placed score
    as a line across it and a marker at the rank it would take."""
    from tabpar.leaderboards.placing import place_on_leaderboard

    ranked = leaderboard.ranked()
    where = place_on_leaderboard(score, leaderboard)
    ranks = np.arange(1, len(ranked) + 1)
    ax.plot(ranks, ranked, color="#0072B2", linewidth=1.4, zorder=2,
            marker="o" if len(ranked) <= 60 else None, markersize=3.5,
            label=f"entries ({len(ranked)}), best first")
    ax.axhline(score, color=USER_COLOUR, linewidth=1.2, linestyle="--", zorder=3)
    ax.scatter([where["leaderboard_rank"]], [score], marker="D", s=70, color=USER_COLOUR,
               zorder=4, label=f"placed score {score:.4g}: rank {where['leaderboard_rank']} of "
                               f"{where['leaderboard_size']}")
    if len(ranked) > 200:  # thousands of runs: ranks are easier to read on a log axis
        ax.set_xscale("log")
    ax.set_xlabel("rank on the leaderboard (1 = best)")
    ax.set_ylabel(f"{leaderboard.score_column}  "
                  f"({'lower' if leaderboard.lower_is_better else 'higher'} is better)")
    ax.set_title(f"leaderboard {leaderboard.name}\ntop {where['top_percent']:.1f}% · beats "
                 f"{where['leaderboard_percentile']:.1f}% of its entries", fontsize=11)
    ax.grid(alpha=0.3)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=1, fontsize=8,
              frameon=False)


def suite_plot(reference: Reference, overlay: Reference | None = None, ax=None):
    """Per task, the gain share of each default ensemble; tasks grouped by type and ordered by
    difficulty within each group (harder lower down), the difficulty printed beside each.

    Parameters
    ----------
    reference : Reference
        A published reference or results folder.
    overlay : Reference, optional
        A run folder of the same suite, its default ensembles drawn hollow on the reference's
        scale (its naive floor and best default).
    ax : matplotlib Axes, optional
        Where to draw; a new Figure when None.

    Returns
    -------
    matplotlib.figure.Figure
    """
    table = model_gain_shares(reference)
    table = table[table["model"].isin(DEFAULT_ENSEMBLES)]
    if table.empty:
        raise UserError(f"The reference {reference.folder} has no default-ensemble results to "
                        f"plot.")
    extra = None
    if overlay is not None:
        if overlay.suite != reference.suite:
            raise UserError(f"The overlay {overlay.folder} is a run of suite '{overlay.suite}' "
                            f"but the reference is of suite '{reference.suite}' (other rows, "
                            f"other holdouts); pass --reference {overlay.suite} or overlay a "
                            f"run of '{reference.suite}'.")
        extra = model_gain_shares(overlay, against=reference)
        extra = extra[extra["model"].isin(DEFAULT_ENSEMBLES) & extra["task"].isin(table["task"])]
    types = {t: str(info.get("type", "")) for t, info in reference.meta.get("tasks", {}).items()
             if isinstance(info, dict)}
    difficulty = table.groupby("task")["difficulty"].first()
    # grouped by task type (a type's tasks share a metric family), easiest first in each group
    # (so, with the axis inverted, the hardest at the bottom of its group)
    order = sorted(difficulty.index, key=lambda t: (_TYPE_ORDER.get(types.get(t, ""), 9),
                                                    difficulty[t]))
    fig, ax = new_axes(ax, 8.5, 0.32 * len(order) + 2.8)
    shown = (pd.concat([table["gain_share"], extra["gain_share"]]) if extra is not None
             else table["gain_share"])
    # the axis follows the points: most gain shares sit near 1, and a fixed axis from 0 left
    # most of the plot empty; the rare point far below is drawn at the left edge
    low = max(-0.5, float(np.nanquantile(shown, 0.02)) - 0.05)
    left = min(low, 0.9)
    right = max(1.05, float(np.nanmax(shown)) + 0.03)
    marker_size = 34 if len(order) <= 20 else 18
    for j, model in enumerate(DEFAULT_ENSEMBLES):
        rows = np.arange(len(order)) + (j - 2) * 0.12
        sub = table[table["model"] == model].set_index("task").reindex(order)
        ax.scatter(np.clip(sub["gain_share"], left, None), rows, s=marker_size,
                   color=PALETTE[model], edgecolor="black", linewidth=0.4, zorder=3,
                   label=model)
        if extra is not None:
            mine = extra[extra["model"] == model].set_index("task").reindex(order)
            ax.scatter(np.clip(mine["gain_share"], left, None), rows, s=3 * marker_size,
                       facecolor="none", edgecolor=PALETTE[model], linewidth=1.6, zorder=4)
    if extra is not None:
        ax.scatter([], [], s=95, facecolor="none", edgecolor="black", linewidth=1.6,
                   label=f"hollow: {Path(overlay.folder).name}")
    if left <= 0:
        ax.axvline(0, color="#999999", linestyle=":", label="naive floor (gain share 0)")
    ax.axvline(1, color="#0072B2", linestyle="--", label="best default (gain share 1)")
    labels = [f"{t}  ({difficulty[t]:.2f})" for t in order]
    ax.set_yticks(range(len(order)))
    ax.set_yticklabels(labels, fontsize=9 if len(order) <= 20 else 7)
    ax.set_ylim(len(order) - 0.5, -0.5)
    for kind, first, last in _groups([types.get(t, "") for t in order]):
        if first > 0:
            ax.axhline(first - 0.5, color="black", linewidth=0.6)
        ax.annotate(kind or "other", (1.0, (first + last) / 2), xycoords=("axes fraction", "data"),
                    xytext=(6, 0), textcoords="offset points", rotation=270, va="center",
                    fontsize=9, color="#444444")
    ax.set_xlim(left, right)
    clipped = float(np.nanmin(shown)) < left
    ax.set_xlabel("gain share = gain over naive / best default's gain  (better →"
                  + (f"; lower values drawn at {left:.2f}" if clipped else "") + ")\n"
                  "in brackets: difficulty = 1 − the share of the room between naive and a "
                  "perfect score that the best default takes (0 = solved, 1 = nothing learnt)",
                  fontsize=8.5)
    ax.set_title(f"Default ensembles across suite '{reference.suite}'\n"
                 f"grouped by task type; within a type, harder tasks lower down", fontsize=11)
    ax.grid(axis="x", alpha=0.3)
    # a fixed distance below the axes (under the two-line x-label), whatever the plot's height:
    # a fraction of the axes left a gap of several inches at 60+ tasks
    from matplotlib.transforms import ScaledTranslation

    below = ax.transAxes + ScaledTranslation(0, -0.85, ax.figure.dpi_scale_trans)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, 0), bbox_transform=below, ncol=4,
              fontsize=8, frameon=False)
    return fig


_TYPE_ORDER = {"regression": 0, "binary": 1, "multiclass": 2}


def _groups(kinds: list[str]):
    """(kind, first index, last index) of each run of equal kinds."""
    out, start = [], 0
    for i in range(1, len(kinds) + 1):
        if i == len(kinds) or kinds[i] != kinds[start]:
            out.append((kinds[start], start, i - 1))
            start = i
    return out


def forest_plot(comparison, ax=None):
    """One row per task of a comparison: the delta and its 95% band, a zero line, the
    tolerance shaded, wins/ties/losses in the title.

    Parameters
    ----------
    comparison : Comparison
        The answer of ``tabpar.compare``.
    ax : matplotlib Axes, optional
        Where to draw; a new Figure when None.

    Returns
    -------
    matplotlib.figure.Figure
    """
    rows = [t for t in comparison.tasks if t.delta is not None]
    if not rows:
        raise UserError("No task has a delta to plot (every task failed or had no scale).")
    fig, ax = new_axes(ax, 8, 0.45 * len(rows) + 2.2)
    colours = {"better": "#009E73", "worse": "#D55E00", "same": "#666666"}
    for i, t in enumerate(rows):
        colour = colours.get(t.call, "#666666")
        ax.plot([t.low, t.high], [i, i], color=colour, linewidth=2.2, solid_capstyle="butt")
        ax.scatter([t.delta], [i], color=colour, edgecolor="black", s=46, zorder=3)
    for call, colour in colours.items():
        ax.scatter([], [], color=colour, edgecolor="black", s=46, label=call)
    ax.axvline(0, color="black", linewidth=1)
    if comparison.tolerance:
        ax.axvspan(-comparison.tolerance, comparison.tolerance, color="#999999", alpha=0.15,
                   label=f"tolerance ±{comparison.tolerance:g}")
    ax.set_yticks(range(len(rows)))
    ax.set_yticklabels([f"{t.task}{' (leak)' if t.leakage else ''}" for t in rows])
    ax.invert_yaxis()
    ax.set_xlabel("delta: candidate's gain over baseline / baseline's gain over naive "
                  "(better →)")
    verdict = "REGRESSION" if comparison.regression else "no regression"
    ax.set_title(f"{comparison.candidate} vs {comparison.baseline}"
                 f"{' (A/A)' if comparison.aa else ''}\nwins {comparison.wins} · ties "
                 f"{comparison.ties} · losses {comparison.losses} · {verdict}", fontsize=11)
    ax.grid(axis="x", alpha=0.3)
    # below the axes: inside, the legend covered a task's point
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=4, fontsize=8,
              frameon=False)
    return fig
