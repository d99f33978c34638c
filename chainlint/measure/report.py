"""`chainlint measure` output: a table per chain, or JSON with the same figures."""

from __future__ import annotations

import json
from collections.abc import Sequence

from chainlint.measure.run import Measurement, OrderTiming
from chainlint.units import duration


def _order_record(timing: OrderTiming | None) -> dict | None:
    if timing is None:
        return None
    return {
        "order": list(timing.order),
        "groups": [list(g) for g in timing.groups],
        "seconds": round(timing.seconds, 6),
        "step_seconds": [round(s, 6) for s in timing.step_seconds],
        "rows_after": list(timing.rows_after),
    }


#: What ran fastest, when it is not the planned form.
_FASTEST = {"written": "the written form", "single order": "the cheapest order of single steps"}


def measure_json(measurements: Sequence[Measurement]) -> str:
    document = {
        "measurements": [
            {
                "path": m.chain.path,
                "line": m.chain.span.line,
                "column": m.chain.span.column,
                "rows": m.rows,
                "written": _order_record(m.written),
                "planned": _order_record(m.planned),
                "single_order": _order_record(m.single),
                "fastest": m.fastest,
                "measured_speedup": round(m.measured_speedup, 4),
                "estimated_speedup": round(m.estimated_speedup, 4),
                "same_result": m.same_result,
                "same_index_type": m.same_index_type,
            }
            for m in measurements
        ]
    }
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


def measure_text(measurements: Sequence[Measurement]) -> str:
    blocks = []
    for m in measurements:
        lines = [f"{m.chain.path}:{m.chain.span.line}:{m.chain.span.column}: chain on `{m.chain.frame}`, {m.rows:,} rows"]
        forms = [("written", m.written), ("planned", m.planned)] + ([("single", m.single)] if m.single else [])
        for name, timing in forms:
            steps = ", ".join("(" + " & ".join(str(i + 1) for i in g) + ")" if len(g) > 1 else str(g[0] + 1) for g in timing.groups)
            rows = " -> ".join(f"{r:,}" for r in timing.rows_after)
            per_step = ", ".join(duration(s) for s in timing.step_seconds)
            lines.append(f"  {name:8} steps {steps:<14} {duration(timing.seconds):>10}  (per step: {per_step})  rows: {rows}")
        if not m.same_result:
            verdict = "DIFFERENT FRAMES"
        elif m.same_index_type:
            verdict = "same frame"
        else:
            verdict = "same frame, but with another index class or freq (README: the index after a reorder)"
        every = "both orders" if m.single is None else "all three forms"
        lines.append(f"  measured speedup {m.measured_speedup:.2f}x, estimated {m.estimated_speedup:.2f}x; {every} return the {verdict}"
                     + ("" if m.fastest == "planned" else f"; {_FASTEST[m.fastest]} ran fastest"))
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks) + ("\n" if blocks else "")
