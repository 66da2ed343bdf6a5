"""User text on its way out: plain in figures (no math-text parsing of titles and names) and safe in CSV
files opened by a spreadsheet (no cell read as a formula)."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

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


def write_columns_csv(path, columns: dict) -> Path:
    """Equal-length columns (name -> array) to a CSV file as pandas' ``DataFrame.to_csv(index=False)``
    writes them after ``safe_frame`` (shortest round-trip floats, an empty cell for NaN, safe names and
    text), without importing pandas: the profiles of simulate and optimize, where pandas and the pyarrow it
    loads would be 0.4-0.5 s of each process."""
    texts = [_column_texts(np.asarray(values)) for values in columns.values()]
    path = Path(path)
    with path.open("w", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow([cell(str(name)) for name in columns])
        writer.writerows(zip(*texts))
    return path


def _column_texts(values: np.ndarray) -> list:
    if values.dtype.kind == "f":
        return ["" if v != v else repr(v) for v in values.tolist()]
    if values.dtype.kind in "iub":
        return [str(v) for v in values.tolist()]
    return [cell(v) if isinstance(v, str) else ("" if v is None else str(v)) for v in values.tolist()]
