"""A pytest helper: assert that a preprocessing change does not regress on a suite.

    from tabpar.testing import assert_no_regression

    def test_my_encoding_does_not_hurt(tmp_path):
        assert_no_regression("mypipeline:make_transformer", suite="quick", out=tmp_path)
"""
from __future__ import annotations

from tabpar.evaluation.comparison import Comparison, compare


def assert_no_regression(candidate: str, suite: str = "quick", **options) -> Comparison:
    """Run ``compare`` and raise AssertionError (with the table) on a regression or a failed
    leakage guard; returns the Comparison otherwise."""
    result = compare(candidate, suite=suite, **options)
    if not result.passed:
        raise AssertionError(f"tabpar found a regression:\n{result}")
    return result
