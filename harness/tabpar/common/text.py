"""Text shared by every result object: the one number formatter, and an escaped HTML table for
notebooks."""
from __future__ import annotations

import difflib
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


def column_places(values, digits: int = 4) -> int:
    """Decimals that show the largest of ``values`` to ``digits`` significant digits, so one
    column of a table shares one number of decimals (``7.99`` beside ``23.20``, not ``7.9879``).

    Examples
    --------
    >>> column_places([7.9879, 23.2]), column_places([0.7472, 0.5]), column_places([41234.5])
    (2, 4, 0)
    """
    finite = [abs(float(v)) for v in values if v is not None and np.isfinite(float(v))]
    largest = max(finite, default=0.0)
    if largest == 0:
        return digits
    return int(max(0, digits - 1 - np.floor(np.log10(largest))))


def format_fixed(value, places: int) -> str:
    """A number with ``places`` decimals and thousands separators; ``"-"`` for none/NaN.

    Examples
    --------
    >>> format_fixed(1234.5, 1), format_fixed(None, 2)
    ('1,234.5', '-')
    """
    if value is None or not np.isfinite(float(value)):
        return "-"
    return f"{float(value):,.{places}f}"


def format_p(p) -> str:
    """A p-value for text: three decimals, ``"< 0.001"`` below that (never ``0.000``).

    Examples
    --------
    >>> format_p(0.04567), format_p(0.00001), format_p(1.0)
    ('0.046', '< 0.001', '1.000')
    """
    if p is None or not np.isfinite(float(p)):
        return "n/a"
    return "< 0.001" if float(p) < 0.0005 else f"{float(p):.3f}"


def count_of(n: int, noun: str, plural_form: str | None = None) -> str:
    """``"1 job"``, ``"2 jobs"``, ``"1,200 rows"``.

    Examples
    --------
    >>> count_of(1, "job"), count_of(3, "job"), count_of(2, "class", "classes")
    ('1 job', '3 jobs', '2 classes')
    """
    word = noun if n == 1 else (plural_form or noun + "s")
    return f"{n:,} {word}"


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


def close_matches(word: str, options, n=3) -> str:
    """A hint for an error message naming up to ``n`` of ``options`` close to ``word``.

    Parameters
    ----------
    word : str
        The name the user gave.
    options
        The valid names.
    n : int
        Most names to suggest.

    Returns
    -------
    str
        ``" Did you mean 'a', 'b'?"`` (with a leading space, to follow a sentence), or ``""``
        when nothing is close.
    """
    matches = difflib.get_close_matches(word, list(options), n=n, cutoff=0.5)
    return f" Did you mean {', '.join(repr(m) for m in matches)}?" if matches else ""
