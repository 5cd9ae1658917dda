"""Multiclass placement with a predictions file: export writes the class columns the file needs,
the printed next steps work verbatim, and the placed file is scored as scikit-learn scores it.

Outside sources: scikit-learn's bundled wine data (its documentation, "Wine recognition
dataset": 178 samples, 13 features, 3 classes of 59, 71 and 48), ``sklearn.metrics.log_loss``
and ``sklearn.metrics.accuracy_score``.
"""
from __future__ import annotations

import json
import shlex

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score, log_loss
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from tabpar.cli.main import main
from tabpar.common.metrics import METRICS

SUITE = """
[suite]
name = "wine3"
description = "One multiclass task for the placement tests."

[[task]]
name = "wine"
description = "Cultivar of 178 Italian wines from 13 chemical measurements."
source = "sklearn:wine"
target = "target"
type = "multiclass"
metric = "log_loss"
holdout = { policy = "random", fraction = 0.3, seed = 0 }
"""


def cli(args, capsys):
    code = main(list(args))
    out, err = capsys.readouterr()
    assert code == 0, err
    return out


@pytest.fixture(scope="module")
def wine(tmp_path_factory):
    root = tmp_path_factory.mktemp("wine")
    suite = root / "wine3.toml"
    suite.write_text(SUITE, encoding="utf-8")
    return root, suite


def test_wine_matches_its_documentation():
    from tabpar.data.sources import load_sklearn

    frame = load_sklearn("wine")
    # scikit-learn documentation, "Wine recognition dataset": 178 instances, 13 attributes,
    # class_0 59, class_1 71, class_2 48
    assert frame.shape == (178, 14)
    assert sorted(frame["target"].value_counts().tolist()) == [48, 59, 71]


def test_export_fit_and_place_a_multiclass_predictions_file(wine, capsys):
    root, suite = wine
    split = root / "split"
    out = cli(["export", "wine", str(split), "--suite", str(suite)], capsys)
    described = json.loads((split / "task.json").read_text())
    assert described["classes"] == ["class_0", "class_1", "class_2"]
    assert described["columns"] == ["row_id", "class_0", "class_1", "class_2"]
    assert "'class_0', 'class_1', 'class_2'" in described["how_to_submit"]

    # a small pipeline written here (scikit-learn), its probabilities in the export's layout
    train, holdout = pd.read_csv(split / "train.csv"), pd.read_csv(split / "holdout.csv")
    features = [c for c in holdout.columns if c != "row_id"]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    model.fit(train[features], train["target"])
    proba = model.predict_proba(holdout[features])
    frame = pd.DataFrame(proba, columns=[str(c) for c in model.classes_])
    frame.insert(0, "row_id", holdout["row_id"])
    predictions = root / "mine.csv"
    frame.sample(frac=1.0, random_state=1).to_csv(predictions, index=False)  # any row order

    # the printed next step, verbatim: build the suite's reference once, then place
    step = out.split("Then: ", 1)[1].strip()
    build, place = step.split(" (once), then ")
    reference = root / "reference"
    cli(shlex.split(build.replace("REFERENCE", str(reference)))[1:] + ["--seeds", "1",
                                                                       "--quiet"], capsys)
    text = cli(shlex.split(place.replace("REFERENCE", str(reference))
                           .replace("FILE", str(predictions)))[1:] + ["--json"], capsys)
    placed = json.loads(text)
    assert placed["verdict"] in ("worse-than-naive", "below-baseline", "at-baseline",
                                 "above-baseline")
    assert placed["paired"] is True

    # the placed score is scikit-learn's log loss of the same probabilities on the holdout,
    # whose labels are the source's rows at the exported row ids
    from tabpar.data.sources import load_sklearn

    labels = load_sklearn("wine")["target"].to_numpy()[holdout["row_id"].to_numpy()]
    assert placed["score"] == pytest.approx(log_loss(labels, proba, labels=model.classes_),
                                            rel=1e-9)
    codes = pd.Index(model.classes_).get_indexer(labels)
    assert METRICS["accuracy"](codes, proba) == pytest.approx(
        accuracy_score(labels, model.classes_[proba.argmax(axis=1)]))
    assert len(train) + len(holdout) == 178


@pytest.mark.parametrize("change, words", [
    (lambda f: f.drop(columns=["class_2"]), "lacks the probability column(s) 'class_2'"),
    (lambda f: f.assign(extra=1.0), "'extra' that are not classes"),
    (lambda f: f.assign(class_0=f["class_0"] + 0.2), "sum to"),
    (lambda f: f.assign(class_1=-f["class_1"]), "outside 0..1"),
])
def test_multiclass_file_mistakes_are_one_sentence(wine, change, words, tmp_path):
    from tabpar.common.errors import UserError
    from tabpar.evaluation.predictions import read_predictions_file

    row_id = np.arange(10)
    proba = np.full((10, 3), 1 / 3)
    frame = pd.DataFrame(proba, columns=["class_0", "class_1", "class_2"])
    frame.insert(0, "row_id", row_id)
    path = tmp_path / "p.csv"
    change(frame).to_csv(path, index=False)
    with pytest.raises(UserError) as caught:
        read_predictions_file(path, row_id, "multiclass", "wine",
                              classes=["class_0", "class_1", "class_2"])
    assert words in str(caught.value)
