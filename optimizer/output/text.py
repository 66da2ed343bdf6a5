"""User text on its way out: plain in figures (no math-text parsing of titles and names) and safe in CSV
files opened by a spreadsheet (no cell read as a formula)."""

from __future__ import annotations

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def plain(text) -> str:
    """``text`` for a matplotlib label: a dollar sign is escaped, so nothing is parsed as math text."""
    return str(text).replace("$", r"\$")


def cell(value):
    """A CSV cell that a spreadsheet shows as text when it would start a formula (OWASP's CSV-injection
    advice: prefix a quote); numbers pass unchanged."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value


def safe_frame(frame):
    """A copy of a pandas DataFrame with safe column names and text cells."""
    from pandas.api.types import is_numeric_dtype

    out = frame.copy()
    out.columns = [cell(str(c)) for c in out.columns]
    for column in out.columns:
        if not is_numeric_dtype(out[column]):
            out[column] = out[column].map(cell)
    if not is_numeric_dtype(out.index):
        out.index = out.index.map(cell)
    return out
