"""Candidate procedures for the compare tests (each a module:function a user could write)."""
import numpy as np
from sklearn.base import BaseEstimator, TransformerMixin
from tabpar.procedure.baseline import BaselinePrep


class CodesPerCall(TransformerMixin, BaseEstimator):
    """The classic mapping mismatch: codes learned afresh on whatever rows are transformed."""

    def __init__(self, date_columns=()):
        self.date_columns = date_columns

    def fit(self, X, y=None):
        self.columns_ = list(X.columns)
        return self

    def transform(self, X):
        prep = BaselinePrep(date_columns=list(self.date_columns), missing_flags=False)
        return prep.fit(X).transform(X)


class CodesFromAllRows(TransformerMixin, BaseEstimator):
    """Codes learned from every row it ever sees, holdout rows included."""

    def __init__(self, date_columns=()):
        self.date_columns = date_columns

    def fit(self, X, y=None):
        self.seen_ = X.copy()
        return self

    def transform(self, X):
        import pandas as pd

        self.seen_ = pd.concat([self.seen_, X]).drop_duplicates()
        prep = BaselinePrep(date_columns=list(self.date_columns), missing_flags=False)
        return prep.fit(self.seen_).transform(X)


class FailsOn(TransformerMixin, BaseEstimator):
    def __init__(self, task="", date_columns=()):
        self.task = task
        self.date_columns = date_columns

    def fit(self, X, y=None):
        if self.task == "attrition":
            raise RuntimeError("synthetic failure for one task")
        self.prep_ = BaselinePrep(date_columns=list(self.date_columns)).fit(X)
        return self

    def transform(self, X):
        return self.prep_.transform(X)


class TextOut(TransformerMixin, BaseEstimator):
    def fit(self, X, y=None):
        return self

    def transform(self, X):
        return np.full((len(X), 2), "text", dtype=object)


class WrongRows(TransformerMixin, BaseEstimator):
    def fit(self, X, y=None):
        return self

    def transform(self, X):
        return np.zeros((len(X) + 1, 2))


def codes_per_call(columns):
    return CodesPerCall(date_columns=columns.date_columns)


def codes_from_all_rows(columns):
    return CodesFromAllRows(date_columns=columns.date_columns)


def fails_on_attrition(columns):
    return FailsOn(task=columns.task, date_columns=columns.date_columns)


def not_a_transformer():
    return 42


def text_output():
    return TextOut()


def wrong_rows():
    return WrongRows()
