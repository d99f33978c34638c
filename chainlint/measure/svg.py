"""A plain SVG picture of `chainlint measure`: one panel per measured chain.

Written by hand (no plotting library). Each panel shows, for the written and the planned order
side by side, the rows left after each step on a logarithmic axis (a selective first step
would flatten every later one on a linear axis) and each step's median time in milliseconds,
with axis values, step numbers on the points and bars, and the steps' predicates listed below.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from html import escape

from chainlint.measure.run import Measurement, OrderTiming
from chainlint.units import duration

_WIDTH = 960
_PLOT_HEIGHT = 200
_ROWS_LEFT, _ROWS_RIGHT = 80, 430
_TIME_LEFT, _TIME_RIGHT = 540, 930
_COLOURS = {"written": "#c0504d", "planned": "#2f6db5"}
_LINE_HEIGHT = 16


def measurement_svg(measurements: Sequence[Measurement]) -> str:
    """The picture of every measured chain, stacked top to bottom."""
    panels, top = [], 0
    for measurement in measurements:
        body, height = _panel(measurement, top)
        panels.append(body)
        top += height
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{_WIDTH}" height="{top}" viewBox="0 0 {_WIDTH} {top}" '
        'font-family="sans-serif" font-size="12">\n'
        f'<rect width="{_WIDTH}" height="{top}" fill="white"/>\n' + "\n".join(panels) + "\n</svg>\n"
    )


def _panel(m: Measurement, top: int) -> tuple[str, int]:
    chain = m.chain
    orders = {"written": m.written, "planned": m.planned}
    title = (f"{chain.path}:{chain.span.line} — chain on `{chain.frame}`, {m.rows:,} rows — planned form "
             f"{m.measured_speedup:.2f}x faster measured, {m.estimated_speedup:.2f}x estimated")
    plot_top = top + 60
    parts = [_text(20, top + 24, title, size=14, weight="bold"),
             _text(_ROWS_LEFT, plot_top - 12, "rows left after each step (log scale)"),
             _text(_TIME_LEFT, plot_top - 12, "time of each step (median, ms)")]
    parts += _rows_plot(m, orders, plot_top)
    parts += _time_plot(orders, plot_top)
    legend_y = plot_top + _PLOT_HEIGHT + 50
    for offset, (name, timing) in enumerate(orders.items()):
        x = 20 + offset * 470
        steps = ", ".join(_label(g) for g in timing.groups)
        parts.append(f'<rect x="{x}" y="{legend_y - 10}" width="12" height="12" fill="{_COLOURS[name]}"/>')
        parts.append(_text(x + 18, legend_y, f"{name}: steps {steps} — {duration(timing.seconds)} in all"))
    y = legend_y
    for number, step in enumerate(chain.steps, start=1):
        y += _LINE_HEIGHT
        parts.append(_text(20, y, f"step {number}: {_shorten(step.predicate.canonical(), 130)}"))
    return "\n".join(parts), y - top + 24


def _rows_plot(m: Measurement, orders: dict[str, OrderTiming], top: int) -> list[str]:
    bottom = top + _PLOT_HEIGHT
    counts = [m.rows, *(r for t in orders.values() for r in t.rows_after)]
    high = max(1, math.ceil(math.log10(max(max(counts), 1))))
    low = min(high - 2, math.floor(math.log10(min([c for c in counts if c > 0] or [1]))))
    span = high - low

    def y_of(rows: int) -> float:
        # Zero rows sit on the axis itself, one step below the lowest power of ten shown.
        if rows <= 0:
            return bottom
        return bottom - 14 - (_PLOT_HEIGHT - 14) * (math.log10(rows) - low) / span

    steps = len(m.chain.steps)
    x_step = (_ROWS_RIGHT - _ROWS_LEFT) / steps
    parts = _axes(_ROWS_LEFT, _ROWS_RIGHT, top)
    for power in range(low, high + 1):
        y = y_of(10 ** power)
        parts.append(f'<line x1="{_ROWS_LEFT - 4}" y1="{y:.1f}" x2="{_ROWS_RIGHT}" y2="{y:.1f}" stroke="#ddd"/>')
        parts.append(_text(_ROWS_LEFT - 6, y + 4, f"{10 ** power:,}", anchor="end"))
    parts.append(_text(_ROWS_LEFT - 6, bottom + 4, "0", anchor="end"))
    for k in range(steps + 1):
        label = "input" if k == 0 else f"after {k}"
        parts.append(_text(_ROWS_LEFT + k * x_step, bottom + 16, label, anchor="middle"))
    for offset, (name, timing) in enumerate(orders.items()):
        points = [(_ROWS_LEFT, y_of(m.rows))]
        points += [(_ROWS_LEFT + (k + 1) * x_step, y_of(rows)) for k, rows in enumerate(timing.rows_after)]
        path = " ".join(f"{x:.1f},{y:.1f}" for x, y in points)
        parts.append(f'<polyline points="{path}" fill="none" stroke="{_COLOURS[name]}" stroke-width="2"/>')
        for (x, y), group, rows in zip(points[1:], timing.groups, timing.rows_after):
            parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3" fill="{_COLOURS[name]}"><title>{name}, step {_label(group)}: '
                         f'{rows:,} rows left</title></circle>')
            dy = -8 if offset == 0 else 16
            parts.append(_text(x + 4, y + dy, _label(group), colour=_COLOURS[name]))
    return parts


def _time_plot(orders: dict[str, OrderTiming], top: int) -> list[str]:
    bottom = top + _PLOT_HEIGHT
    slowest = max(max(t.step_seconds, default=0.0) for t in orders.values()) * 1e3
    tick = _tick(slowest)
    ceiling = max(tick * math.ceil(slowest / tick), tick)
    parts = _axes(_TIME_LEFT, _TIME_RIGHT, top)
    value = 0.0
    while value <= ceiling + tick / 2:
        y = bottom - _PLOT_HEIGHT * value / ceiling
        parts.append(f'<line x1="{_TIME_LEFT - 4}" y1="{y:.1f}" x2="{_TIME_RIGHT}" y2="{y:.1f}" stroke="#ddd"/>')
        parts.append(_text(_TIME_LEFT - 6, y + 4, f"{value:g}", anchor="end"))
        value += tick
    steps = max(len(t.groups) for t in orders.values())
    group = (_TIME_RIGHT - _TIME_LEFT) / 2
    bar = min(40.0, group / (steps + 1))
    for offset, (name, timing) in enumerate(orders.items()):
        start = _TIME_LEFT + offset * group + (group - bar * steps) / 2
        parts.append(_text(_TIME_LEFT + offset * group + group / 2, bottom + 32, name, anchor="middle",
                           colour=_COLOURS[name]))
        for k, (members, seconds) in enumerate(zip(timing.groups, timing.step_seconds)):
            tall = _PLOT_HEIGHT * seconds * 1e3 / ceiling
            x = start + k * bar
            parts.append(f'<rect x="{x + 2:.1f}" y="{bottom - tall:.1f}" width="{bar - 4:.1f}" height="{tall:.1f}" '
                         f'fill="{_COLOURS[name]}"><title>{name}, step {_label(members)}: {duration(seconds)}</title></rect>')
            parts.append(_text(x + bar / 2, bottom + 16, f"step {_label(members)}", anchor="middle", size=10))
    return parts


def _label(group: tuple[int, ...]) -> str:
    """A group's step numbers: `3`, or `1+2` for steps run as one mask."""
    return "+".join(str(i + 1) for i in group)


def _axes(left: float, right: float, top: float) -> list[str]:
    bottom = top + _PLOT_HEIGHT
    return [f'<line x1="{left}" y1="{top}" x2="{left}" y2="{bottom}" stroke="black"/>',
            f'<line x1="{left}" y1="{bottom}" x2="{right}" y2="{bottom}" stroke="black"/>']


def _tick(largest: float) -> float:
    """A round step (1, 2 or 5 times a power of ten) giving four to ten grid lines."""
    if largest <= 0:
        return 1.0
    raw = largest / 5
    power = 10 ** math.floor(math.log10(raw))
    return next(m * power for m in (1, 2, 5, 10) if m * power >= raw)


def _shorten(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _text(x: float, y: float, content: str, anchor: str = "start", size: int = 12, weight: str = "normal",
          colour: str = "black") -> str:
    return (f'<text x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}" font-size="{size}" font-weight="{weight}" '
            f'fill="{colour}">{escape(content)}</text>')
