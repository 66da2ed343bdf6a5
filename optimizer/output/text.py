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
    texts = [[_cell_text(v) for v in np.asarray(values).tolist()] for values in columns.values()]
    return _write_csv(path, [cell(str(name)) for name in columns], zip(*texts))


def write_records_csv(path, records: list) -> Path:
    """Rows given as dicts to a CSV file, one column per key (in the order the keys first appear), an empty
    cell where a row has no value; cells as in ``write_columns_csv``."""
    names = list(dict.fromkeys(key for record in records for key in record))
    rows = ([_cell_text(record.get(name)) for name in names] for record in records)
    return _write_csv(path, [cell(str(name)) for name in names], rows)


def _write_csv(path, header, rows) -> Path:
    path = Path(path)
    with path.open("w", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)
    return path


def _cell_text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return "" if value != value else repr(value)
    if isinstance(value, str):
        return cell(value)
    return str(value)
