"""Suite files: the built-in suites load, a valid synthetic suite loads as written, and
``extends`` reuses a parent's tasks.

Each kind of mistake in a suite file (unknown field, source kind, metric, task type, holdout
field, duplicate task name, binary task without ``positive``, TOML syntax, unknown built-in
suite, ...) is a case of the bad-input matrix (tests/test_bad_input.py, cases 'run-suite-*'),
checked there through the command line. The suite below is a synthetic stand-in.
"""
from __future__ import annotations

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
