"""The learning curve of ``tabpar calibrate``, and the calibration's two plots saved as files."""
from __future__ import annotations

from pathlib import Path

from tabpar.common.metrics import get_metric
from tabpar.common.text import format_number as fmt
from tabpar.owndata.answer import Calibration
from tabpar.owndata.diagnostics import Diagnostic
from tabpar.report.plots import new_axes, placement_plot, save_figure


def plot_learning_curve(diagnostic: Diagnostic, metric_name: str, ax=None, title: str = ""):
    """Draw a ``learning_curve`` result: score vs training rows with 95% bands, naive line.

    Parameters
    ----------
    diagnostic : Diagnostic
        The answer of ``tabpar.owndata.diagnostics.learning_curve`` (with at least one point).
    metric_name : str
        The task's metric; the y axis is its holdout score, in its units, with its direction
        stated.
    ax : matplotlib Axes, optional
        Where to draw; a new Figure when None.
    title : str
        Put before the verdict in the title (e.g. the task's name).

    Returns
    -------
    matplotlib.figure.Figure
        The figure drawn on; nothing is saved.
    """
    points = diagnostic.numbers.get("points", [])
    fig, ax = new_axes(ax, 7, 4.2)
    rows = [p["rows"] for p in points]
    scores = [p["score"] for p in points]
    ax.errorbar(rows, scores, yerr=[p["noise"] for p in points], color="#D55E00", marker="o",
                capsize=4, linewidth=1.8, label="LightGBM at its defaults (± 95% bootstrap)")
    ax.axhline(diagnostic.numbers["naive_score"], color="#999999", linestyle=":",
               linewidth=1.5, label=f"naive floor {fmt(diagnostic.numbers['naive_score'])}")
    if len(rows) > 1:
        ax.set_xscale("log", base=2)
    ax.set_xticks(rows)
    ax.set_xticklabels([f"{r:,}\n({p['fraction']:.0%})" for r, p in zip(rows, points)])
    ax.minorticks_off()
    metric = get_metric(metric_name)
    arrow = "lower is better" if metric.lower_is_better else "higher is better"
    ax.set_ylabel(f"{metric_name} on the holdout ({arrow})")
    which = "latest training rows" if diagnostic.numbers.get("latest_rows") else \
        "training rows (seeded sample)"
    ax.set_xlabel(f"{which} used to fit")
    gain, noise = diagnostic.numbers.get("gain_last"), diagnostic.numbers.get("gain_last_noise")
    verdict = ("still improving: more rows would likely help" if diagnostic.flag else
               "full set worse than half of it" if gain is not None and gain < -noise else
               "last step within the noise: more rows unlikely to help much")
    ax.set_title(f"{title + ': ' if title else ''}learning curve — {verdict}", fontsize=11)
    if gain is not None:
        # the bars are each point's own band; the verdict uses the narrower paired band
        better = "better" if gain > 0 else "worse"
        ax.plot([], [], " ", label=f"last step: {fmt(abs(gain), 3)} {better} ± {fmt(noise, 3)} "
                                   f"(paired bootstrap, same holdout rows)")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=1,
              frameon=False)
    return fig


def save_calibration_plots(calibration: Calibration, out) -> list[Path]:
    """Draw a calibration's placement and learning curve and save them as ``placement.png``
    and ``learning_curve.png`` in ``out``.

    The files are also recorded in ``calibration.files``, and the calibration's
    ``report.md`` / ``report.json`` rewritten, so the reports list them.

    Parameters
    ----------
    calibration : Calibration
        The answer of ``tabpar.calibrate``.
    out : str or Path
        The folder to write into (usually ``calibration.out``).

    Returns
    -------
    list of Path
        The files written: the placement plot, then the learning curve when the curve has
        points (too few training rows leave it out).
    """
    out = Path(out)
    paths = {"placement_plot": save_figure(placement_plot(calibration.placement),
                                           out / "placement.png")}
    curve = calibration.diagnostic("learning-curve")
    if curve is not None and curve.numbers.get("points"):
        figure = plot_learning_curve(curve, calibration.task.metric, title=calibration.task.name)
        paths["learning_curve_plot"] = save_figure(figure, out / "learning_curve.png")
    calibration.add_files(paths)
    return list(paths.values())
