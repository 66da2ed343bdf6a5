"""Standard heat-exchanger tubes: outer diameters and wall gauges of TEMA RCB-2.21 (TEMA Standards, 9th ed.,
2007), wall thicknesses of the Birmingham wire gauge (BWG). Values as commonly tabulated (from memory; the
tests compare them with the tables the ``ht`` library carries)."""

from __future__ import annotations

INCH = 0.0254

# outer diameter [inch] -> allowed BWG gauges
TEMA_TUBES = {
    0.25: (22, 24), 0.375: (18, 20, 22), 0.5: (18, 20), 0.625: (16, 18, 20), 0.75: (12, 14, 16, 18, 20),
    0.875: (14, 16, 18, 20), 1.0: (12, 14, 16, 18), 1.25: (10, 12, 14, 16), 2.0: (12, 14),
}

# BWG gauge -> wall thickness [m]
BWG_THICKNESS = {
    10: 0.003404, 12: 0.002769, 14: 0.002108, 16: 0.001651, 18: 0.001245, 20: 0.000889, 22: 0.000711,
    24: 0.000559,
}


def standard_tubes(min_inner: float = 0.0, max_inner: float = 1.0) -> list[dict]:
    """Every TEMA tube whose inner diameter lies in [min_inner, max_inner] m, thinnest wall last."""
    out = []
    for od_in, gauges in TEMA_TUBES.items():
        for g in gauges:
            od = od_in * INCH
            wall = BWG_THICKNESS[g]
            inner = od - 2 * wall
            if min_inner <= inner <= max_inner:
                out.append({"label": f'{od_in:g}" OD, BWG {g}', "outer_diameter_m": od, "wall_thickness_m": wall,
                            "inner_diameter_m": inner})
    return out
