"""Values made JSON-safe: NaN and infinity become null, numpy scalars plain numbers, numpy arrays lists, keys
strings."""

from __future__ import annotations

import math


def finite(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {str(k): finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [finite(v) for v in value]
    if hasattr(value, "tolist") and getattr(value, "ndim", 0) > 0:  # numpy arrays
        return finite(value.tolist())
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):  # numpy scalars
        return finite(value.item())
    return value
