"""tabpar plot: comparison plots of a reference (and a run over it)."""
from __future__ import annotations

from tabpar.cli import options


def add_parser(subparsers) -> None:
    plot = subparsers.add_parser("plot", help="draw comparison plots")
    kinds = plot.add_subparsers(dest="plot_kind", metavar="KIND", required=True)
    suite = kinds.add_parser("suite", help="gain share of each default ensemble per task, tasks "
                                           "ordered by difficulty")
    suite.add_argument("out", help="output file (.png or .svg)")
    options.add_reference(suite, "reference name or results folder")
    suite.add_argument("--overlay", default=None, help="a run folder to overlay (hollow markers)")
    suite.set_defaults(func=plot_suite_command)


def plot_suite_command(args) -> int:
    from tabpar.evaluation.reference import Reference, reference_for
    from tabpar.report.plots import save_figure, suite_plot

    overlay = Reference(args.overlay) if args.overlay else None
    path = save_figure(suite_plot(Reference(args.reference or reference_for()), overlay=overlay), args.out)
    print(f"wrote {path}")
    return 0
