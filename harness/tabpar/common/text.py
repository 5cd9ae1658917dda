"""Text shared by every result object: the one number formatter, and an escaped HTML table for
notebooks."""
from __future__ import annotations

import html

import numpy as np


def format_number(value, digits: int = 4, sign: bool = False) -> str:
    """A number for a sentence or a table: ``digits`` significant digits, or whole and
    thousands-separated from 1,000 up (never exponent notation there).

    Parameters
    ----------
    value : float or None
        The number, in whatever units the text around it states.
    digits : int
        Significant digits below 1,000.
    sign : bool
        Whether a positive number gets a leading ``+``.

    Returns
    -------
    str
        The number as text, or ``"n/a"`` for None, NaN or an infinity.

    Examples
    --------
    >>> format_number(0.123456), format_number(-3, sign=True), format_number(None)
    ('0.1235', '-3', 'n/a')
    >>> format_number(0.05, sign=True), format_number(123456.7)
    ('+0.05', '123,457')
    """
    if value is None or not np.isfinite(float(value)):
        return "n/a"
    value = float(value)
    plus = "+" if sign and value > 0 else ""
    if abs(value) >= 1000:
        return f"{plus}{value:,.0f}"
    return f"{plus}{value:.{digits}g}"


def html_table(rows: dict, caption: str = "") -> str:
    """A two-column HTML table of ``rows`` (name → value), every name and value escaped, so a
    column or task name from a user's file is shown as text, never run as markup.

    Examples
    --------
    >>> html_table({"task": "<b>x</b>"})
    "<table><tr><th style='text-align:left'>task</th><td>&lt;b&gt;x&lt;/b&gt;</td></tr></table>"
    """
    cells = "".join(f"<tr><th style='text-align:left'>{html.escape(str(k))}</th>"
                    f"<td>{html.escape(str(v))}</td></tr>" for k, v in rows.items())
    head = f"<caption>{html.escape(caption)}</caption>" if caption else ""
    return f"<table>{head}{cells}</table>"


def plain(value):
    """A NumPy scalar as the Python number or text it holds (for JSON and messages); anything
    else unchanged."""
    return value.item() if isinstance(value, np.generic) else value
