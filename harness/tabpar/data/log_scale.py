"""The log scale on which RMSLE tasks are trained: ``log1p`` of the target and ``expm1`` back,
with the same last bits on every x86-64 CPU.

NumPy's float64 ``log1p`` and ``expm1`` pick a vectorised loop by the CPU's instruction sets,
and the loops round differently in the last bit (on a table of a million prices, 258 values
differ between the AVX-512 and the AVX2 loop). A random forest or extra trees fitted to targets
a last bit apart can choose other splits where two candidates tie, which moved published
reference scores by up to 2% between two machines of the same kind. Here both functions run
in extended precision (``numpy.longdouble``), whose loops call the C library one value at a
time, and round once to float64: about 60 ms per million values.
"""
from __future__ import annotations

import numpy as np


def to_log_scale(values) -> np.ndarray:
    """``log(1 + values)``, identical on every x86-64 CPU.

    Parameters
    ----------
    values : array-like of float, >= 0 (RMSLE targets)
        Values in the target's units.

    Returns
    -------
    numpy.ndarray of float64
        ``log1p`` of each value (natural logarithm; 0 for 0), the same shape as ``values``.

    Examples
    --------
    >>> to_log_scale([0.0, 1.0, np.e - 1]).round(6).tolist()
    [0.0, 0.693147, 1.0]
    """
    return np.log1p(np.asarray(values, dtype=np.longdouble)).astype(np.float64)


def from_log_scale(values) -> np.ndarray:
    """``exp(values) - 1``, the inverse of ``to_log_scale``, identical on every x86-64 CPU.

    Parameters
    ----------
    values : array-like of float
        Values on the log scale (a model's predictions, say).

    Returns
    -------
    numpy.ndarray of float64
        ``expm1`` of each value, in the target's units; the same shape as ``values``.

    Examples
    --------
    >>> from_log_scale(to_log_scale([0.0, 5.0, 250_000.0])).round(6).tolist()
    [0.0, 5.0, 250000.0]
    """
    return np.expm1(np.asarray(values, dtype=np.longdouble)).astype(np.float64)
