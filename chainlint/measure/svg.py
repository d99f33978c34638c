"""A plain SVG picture of a measurement: rows left after each step, and each step's time.

Written by hand (no plotting library): two panels, the written order in one colour and the
planned order in another, so a reviewer sees at a glance where the time goes.
"""

from __future__ import annotations

from html import escape

from chainlint.measure.run import Measurement

_WIDTH, _PANEL, _MARGIN = 720, 220, 60
_COLOURS = {"written": "#c0504d", "planned": "#4f81bd"}


def measurement_svg(measurement: Measurement) -> str:
    chain = measurement.chain
    count = len(chain.steps)
    orders = {"written": measurement.written, "planned": measurement.planned}
    step_width = (_WIDTH - 2 * _MARGIN) / max(count, 1)
    height = 2 * _PANEL + 3 * _MARGIN
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{_WIDTH}" height="{height}" viewBox="0 0 {_WIDTH} {height}" '
        'font-family="sans-serif" font-size="12">',
        f'<rect width="{_WIDTH}" height="{height}" fill="white"/>',
        f'<text x="{_MARGIN}" y="24" font-size="14">{escape(chain.path)}:{chain.span.line} — {measurement.rows:,} rows; '
        f"measured {measurement.measured_speedup:.2f}x, estimated {measurement.estimated_speedup:.2f}x</text>",
    ]
    # Panel 1: rows remaining after each step (position in the order on the x axis).
    top = _MARGIN
    parts.append(f'<text x="{_MARGIN}" y="{top - 8}">rows remaining after each step</text>')
    parts.append(_axes(top))
    peak = max(measurement.rows, 1)
    for name, timing in orders.items():
        points = [(_MARGIN, top + _PANEL * (1 - measurement.rows / peak))]
        for k, rows in enumerate(timing.rows_after):
            points.append((_MARGIN + (k + 1) * step_width, top + _PANEL * (1 - rows / peak)))
        path = " ".join(f"{x:.1f},{y:.1f}" for x, y in points)
        parts.append(f'<polyline points="{path}" fill="none" stroke="{_COLOURS[name]}" stroke-width="2"/>')
        for (x, y), rows in zip(points[1:], timing.rows_after):
            parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3" fill="{_COLOURS[name]}"><title>{rows:,} rows</title></circle>')
    # Panel 2: time of each step, side by side for the two orders.
    top2 = top + _PANEL + _MARGIN
    parts.append(f'<text x="{_MARGIN}" y="{top2 - 8}">time of each step (median, ms)</text>')
    parts.append(_axes(top2))
    slowest = max(max(t.step_seconds) for t in orders.values()) or 1.0
    bar = step_width / 3
    for offset, (name, timing) in enumerate(orders.items()):
        for k, (index, seconds) in enumerate(zip(timing.order, timing.step_seconds)):
            tall = _PANEL * seconds / slowest
            x = _MARGIN + k * step_width + bar * (offset + 0.5)
            label = escape(chain.steps[index].predicate.canonical())
            parts.append(
                f'<rect x="{x:.1f}" y="{top2 + _PANEL - tall:.1f}" width="{bar:.1f}" height="{tall:.1f}" fill="{_COLOURS[name]}">'
                f"<title>{name} step {k + 1}: {label}: {seconds * 1e3:.2f} ms</title></rect>"
            )
    for k in range(count):
        parts.append(f'<text x="{_MARGIN + (k + 0.5) * step_width:.1f}" y="{top2 + _PANEL + 16}" text-anchor="middle">{k + 1}</text>')
    legend_y = height - 14
    for offset, (name, timing) in enumerate(orders.items()):
        x = _MARGIN + offset * 260
        steps = ", ".join(str(i + 1) for i in timing.order)
        parts.append(f'<rect x="{x}" y="{legend_y - 10}" width="12" height="12" fill="{_COLOURS[name]}"/>')
        parts.append(f'<text x="{x + 18}" y="{legend_y}">{name}: steps {steps}, {timing.seconds * 1e3:.1f} ms</text>')
    parts.append("</svg>")
    return "\n".join(parts) + "\n"


def _axes(top: float) -> str:
    bottom = top + _PANEL
    return (
        f'<line x1="{_MARGIN}" y1="{top}" x2="{_MARGIN}" y2="{bottom}" stroke="black"/>'
        f'<line x1="{_MARGIN}" y1="{bottom}" x2="{_WIDTH - _MARGIN}" y2="{bottom}" stroke="black"/>'
    )
