"""Candidate procedures that misbehave on purpose (the hostile-input tests); each is a
module:function a user could write."""
import sys
import time

import numpy as np
from scipy import sparse
from sklearn.base import BaseEstimator, TransformerMixin


class Numeric(TransformerMixin, BaseEstimator):
    """The numeric columns as they are, as a SciPy sparse matrix when ``as_sparse``."""

    def __init__(self, as_sparse=False, chatty=False, exits=False, sleeps=0.0):
        self.as_sparse = as_sparse
        self.chatty = chatty
        self.exits = exits
        self.sleeps = sleeps

    def fit(self, X, y=None):
        if self.exits:
            sys.exit(0)
        time.sleep(self.sleeps)
        self.columns_ = [c for c in X.columns if X[c].dtype.kind in "if"]
        return self

    def transform(self, X):
        if self.chatty:
            print("transforming", len(X), "rows")
        values = X[self.columns_].to_numpy(dtype=float)
        return sparse.csr_matrix(np.nan_to_num(values)) if self.as_sparse else values


def raises_when_built():
    raise RuntimeError("cannot build")


def takes_two_arguments(columns, extra):
    return Numeric()


def returns_sparse():
    return Numeric(as_sparse=True)


def exits_in_fit():
    return Numeric(exits=True)


def hangs_in_fit():
    return Numeric(sleeps=600.0)


def prints_to_stdout():
    print("building the candidate")
    return Numeric(chatty=True)
