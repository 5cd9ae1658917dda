"""Suite files: the built-in suites load, and each kind of mistake is one UserError sentence.

Every bad suite below is a synthetic stand-in that differs from a valid one in one place.
"""
from __future__ import annotations

import pytest

from tabpar.common.errors import UserError
from tabpar.data.suites import load_suite

VALID = """
[suite]
name = "synthetic"
description = "A synthetic suite for tests."

[[task]]
name = "prices"
source = "csv:prices.csv"
target = "price"
type = "regression"
metric = "rmse"
holdout = { policy = "random", fraction = 0.2, seed = 1 }

[[task]]
name = "churn"
source = "csv:churn.csv"
target = "left"
type = "binary"
positive = "yes"
"""


def test_builtin_suites_have_ten_tasks(suites):
    default, quick = suites["default"], suites["quick"]
    assert len(default.tasks) == 10
    assert len(quick.tasks) == 10
    assert [t.name for t in quick.tasks] == [t.name for t in default.tasks]
    assert all(t.max_rows == 3000 for t in quick.tasks)
    assert all(t.max_rows is None for t in default.tasks)
    binary = [t for t in default.tasks if t.type == "binary"]
    assert binary and all(t.positive is not None for t in binary)


def test_valid_synthetic_suite_loads(write_suite):
    suite = load_suite(write_suite(VALID))
    assert [t.name for t in suite.tasks] == ["prices", "churn"]
    churn = suite.task("churn")
    assert churn.metric == "roc_auc" and churn.positive == "yes"  # the binary default metric
    assert suite.task("prices").holdout.seed == 1


BAD = {
    "unknown-field": (VALID.replace('metric = "rmse"', 'metric = "rmse"\ncolour = "blue"'),
                      "colour"),
    "unknown-source-kind": (VALID.replace('"csv:prices.csv"', '"ftp:prices.csv"'), "ftp"),
    "source-without-kind": (VALID.replace('"csv:prices.csv"', '"prices.csv"'), "prices.csv"),
    "unknown-metric": (VALID.replace('metric = "rmse"', 'metric = "f1_score"'), "f1_score"),
    "metric-unfit-for-regression": (VALID.replace('metric = "rmse"', 'metric = "roc_auc"'),
                                    "roc_auc"),
    "binary-without-positive": (VALID.replace('positive = "yes"\n', ""), "positive"),
    "unknown-holdout-field": (VALID.replace("seed = 1 }", "seed = 1, shuffle = true }"),
                              "shuffle"),
    "unknown-task-type": (VALID.replace('type = "regression"', 'type = "ranking"'), "ranking"),
    "duplicate-task-name": (VALID.replace('name = "churn"', 'name = "prices"'), "prices"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_suite_is_a_user_error_naming_the_problem(case, write_suite):
    text, fragment = BAD[case]
    assert text != VALID
    path = write_suite(text)
    with pytest.raises(UserError) as info:
        load_suite(path)
    message = str(info.value)
    assert fragment in message
    assert str(path) in message  # names the file
    assert "\n" not in message  # one sentence, one line


def test_toml_syntax_error_names_the_line(write_suite):
    lines = VALID.lstrip().splitlines()
    broken = lines.index('target = "price"')
    lines[broken] = 'target "price"'  # missing '='
    path = write_suite("\n".join(lines) + "\n")
    with pytest.raises(UserError) as info:
        load_suite(path)
    message = str(info.value)
    assert f"line {broken + 1}" in message  # 1-based line number of the broken line
    assert str(path) in message


def test_unknown_suite_name_is_a_user_error():
    with pytest.raises(UserError, match="default, quick"):
        load_suite("no-such-suite")


def test_extends_reuses_the_parent_tasks(write_suite, tmp_path):
    write_suite(VALID, name="parent.toml")
    child = write_suite("""
        [suite]
        name = "child"
        extends = "parent.toml"
        max_rows = 500
        """, name="child.toml")
    suite = load_suite(child)
    assert [t.name for t in suite.tasks] == ["prices", "churn"]
    assert all(t.max_rows == 500 for t in suite.tasks)
