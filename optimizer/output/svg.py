"""Small charts written as SVG text, inline in the study report's HTML (hence no namespace attribute): no
plotting library to import (matplotlib's import and layout were 2 s of a report of five figures), and vector
graphics that stay sharp when the page is zoomed or printed. Two kinds: ``chart`` (lines and points against
x, with horizontal reference lines) and ``bars`` (horizontal bars with labels). Every text is escaped;
values that are not finite are left out (a line breaks there)."""

from __future__ import annotations

import html
import math

COLOURS = ("#1f5fa8", "#d9822b", "#2e8b57", "#8e44ad", "#7f7f7f", "#b03a2e")
FONT = "font-family='sans-serif' font-size='11'"


def nice_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """About ``count`` round tick values (1, 2 or 5 times a power of ten apart) covering [low, high]; exact
    while the span is above a millionth of the values (narrower spans meet the float resolution)."""
    if not (math.isfinite(low) and math.isfinite(high)):
        return [0.0, 1.0]
    if high <= low:
        pad = abs(low) * 0.05 or 1.0
        low, high = low - pad, high + pad
    raw = (high - low) / max(count - 1, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(f * power for f in (1.0, 2.0, 5.0, 10.0) if f * power >= raw * (1 - 1e-12))
    first = math.floor(low / step + 1e-9) * step
    ticks, k = [], 0
    while True:
        t = first + k * step
        ticks.append(0.0 if abs(t) < step * 1e-9 else t)
        if t >= high - step * 1e-9:
            return ticks
        k += 1


def _texts(values: list[float]) -> list[str]:
    """The shortest general-format texts (6 significant digits or more) that tell the ticks apart."""
    for digits in range(6, 16):
        texts = [f"{v:.{digits}g}" for v in values]
        if len(set(texts)) == len(texts):
            return texts
    return texts


def _scaled(ticks: list[float], label: str) -> tuple[list[str], str]:
    """Tick texts and axis label: ticks of 1e4 and above (or below 1e-3) are written in a unit of 10^3k named
    in the label ("annual cost [x 1e6]"), so that every tick text stays short."""
    top = max(abs(t) for t in ticks)
    power = 3 * math.floor(math.log10(top) / 3) if top >= 1e4 or 0 < top < 1e-3 else 0
    if not power:
        return _texts(ticks), label
    return _texts([t / 10.0 ** power for t in ticks]), f"{label} [x 1e{power}]"


def _text(x, y, text, anchor="middle", extra="") -> str:
    return (f"<text x='{x:.1f}' y='{y:.1f}' text-anchor='{anchor}' {FONT}{extra}>{html.escape(str(text))}"
            "</text>")


def _finite(xs, ys):
    """The finite points of a series (those of its runs)."""
    return [point for run in _runs(xs, ys) for point in run]


def chart(series, *, xlabel: str = "", ylabel: str = "", title: str = "", hlines=(), width: int = 420,
          height: int = 260) -> str:
    """Lines and points against x. ``series``: dicts with ``x``, ``y`` (sequences), ``label`` and ``mark``:
    "line", "points" or "both"; ``dash`` for a dashed line. ``hlines``: (y, label) reference lines, drawn
    dotted in red."""
    left, right, top, bottom = 64, 12, 26 if title else 12, 42
    pw, ph = width - left - right, height - top - bottom
    xs = [x for s in series for x, _ in _finite(s["x"], s["y"])]
    ys = [y for s in series for _, y in _finite(s["x"], s["y"])] + [y for y, _ in hlines if math.isfinite(y)]
    pad = 0.04 if any(s.get("mark", "line") != "line" for s in series) else 0.0  # no point on the frame
    xt = nice_ticks(*_padded(min(xs, default=0.0), max(xs, default=1.0), pad))
    yt = nice_ticks(*_padded(min(ys, default=0.0), max(ys, default=1.0), pad))

    def px(x):
        return left + (x - xt[0]) / (xt[-1] - xt[0]) * pw

    def py(y):
        return top + ph - (y - yt[0]) / (yt[-1] - yt[0]) * ph

    out = [f"<svg width='{width}' height='{height}' "
           f"viewBox='0 0 {width} {height}' role='img'>",
           f"<rect x='{left}' y='{top}' width='{pw}' height='{ph}' fill='none' stroke='#444'/>"]
    if title:
        out.append(_text(width / 2, 16, title, extra=" font-weight='bold'"))
    x_texts, xlabel = _scaled(xt, xlabel)
    y_texts, ylabel = _scaled(yt, ylabel)
    for t, text in zip(xt, x_texts):
        out.append(f"<line x1='{px(t):.1f}' y1='{top + ph}' x2='{px(t):.1f}' y2='{top + ph + 4}' stroke='#444'/>")
        out.append(_text(px(t), top + ph + 16, text))
    for t, text in zip(yt, y_texts):
        out.append(f"<line x1='{left - 4}' y1='{py(t):.1f}' x2='{left}' y2='{py(t):.1f}' stroke='#444'/>")
        out.append(f"<line x1='{left}' y1='{py(t):.1f}' x2='{left + pw}' y2='{py(t):.1f}' stroke='#eee'/>")
        out.append(_text(left - 6, py(t) + 4, text, anchor="end"))
    out.append(_text(left + pw / 2, height - 8, xlabel))
    out.append(_text(14, top + ph / 2, ylabel, extra=f" transform='rotate(-90 14 {top + ph / 2:.1f})'"))
    for y, _ in hlines:
        if math.isfinite(y):
            out.append(f"<line x1='{left}' y1='{py(y):.1f}' x2='{left + pw}' y2='{py(y):.1f}' stroke='#c00' "
                       "stroke-dasharray='2 3'/>")
    legend = []
    for k, s in enumerate(series):
        colour = COLOURS[k % len(COLOURS)]
        mark = s.get("mark", "line")
        dash = " stroke-dasharray='6 4'" if s.get("dash") else ""
        if mark in ("line", "both"):
            for run in _runs(s["x"], s["y"]):
                points = " ".join(f"{px(x):.1f},{py(y):.1f}" for x, y in run)
                out.append(f"<polyline points='{points}' fill='none' stroke='{colour}' stroke-width='1.5'{dash}/>")
        if mark in ("points", "both"):
            out += [f"<circle cx='{px(x):.1f}' cy='{py(y):.1f}' r='3' fill='{colour}'/>"
                    for x, y in _finite(s["x"], s["y"])]
        if s.get("label"):
            legend.append((s["label"], colour, dash))
    legend += [(label, "#c00", " stroke-dasharray='2 3'") for y, label in hlines if label and math.isfinite(y)]
    if legend:
        out.append(f"<rect x='{left + pw - 116}' y='{top + 2}' width='112' height='{14 * len(legend) + 4}' "
                   "fill='white' fill-opacity='0.85'/>")
    for k, (label, colour, dash) in enumerate(legend):
        y = top + 12 + 14 * k
        out.append(f"<line x1='{left + pw - 110}' y1='{y - 4}' x2='{left + pw - 92}' y2='{y - 4}' stroke='{colour}' "
                   f"stroke-width='1.5'{dash}/>")
        out.append(_text(left + pw - 88, y, label, anchor="start"))
    out.append("</svg>")
    return "".join(out)


def _padded(low: float, high: float, fraction: float) -> tuple[float, float]:
    span = (high - low) * fraction
    return low - span, high + span


def _runs(xs, ys):
    """The finite stretches of a line (a value that is not finite breaks it)."""
    run = []
    for x, y in zip(xs, ys):
        if x is not None and y is not None and math.isfinite(x) and math.isfinite(y):
            run.append((x, y))
        elif run:
            yield run
            run = []
    if run:
        yield run


def bars(labels, values, *, title: str = "", width: int = 300, height: int | None = None) -> str:
    """Horizontal bars, one per label, from zero; a value that is not finite gets no bar and the text n/a."""
    left, right, top = 120, 40, 26 if title else 8
    row = 18
    height = height or top + row * len(labels) + 40
    pw = width - left - right
    finite = [v for v in values if v is not None and math.isfinite(v)]
    ticks = nice_ticks(min([0.0, *finite]), max([0.0, *finite]) or 1.0, 4)

    def px(v):
        return left + (v - ticks[0]) / (ticks[-1] - ticks[0]) * pw

    out = [f"<svg width='{width}' height='{height}' "
           f"viewBox='0 0 {width} {height}' role='img'>"]
    if title:
        out.append(_text(width / 2, 16, title, extra=" font-weight='bold'"))
    for k, (label, value) in enumerate(zip(labels, values)):
        y = top + row * k
        out.append(_text(left - 6, y + 12, label, anchor="end"))
        if value is None or not math.isfinite(value):
            out.append(_text(left + 4, y + 12, "n/a", anchor="start"))
            continue
        x0, x1 = sorted((px(0.0), px(value)))
        out.append(f"<rect x='{x0:.1f}' y='{y + 3}' width='{max(x1 - x0, 0.5):.1f}' height='{row - 6}' "
                   f"fill='{COLOURS[0]}'/>")
    base = top + row * len(labels)
    out.append(f"<line x1='{left}' y1='{base}' x2='{left + pw}' y2='{base}' stroke='#444'/>")
    texts, unit = _scaled(ticks, "")
    for t, text in zip(ticks, texts):
        out.append(f"<line x1='{px(t):.1f}' y1='{base}' x2='{px(t):.1f}' y2='{base + 4}' stroke='#444'/>")
        out.append(_text(px(t), base + 16, text))
    if unit:
        out.append(_text(left + pw, base + 30, unit.strip(), anchor="end"))
    out.append("</svg>")
    return "".join(out)
