"""Readable summaries of profiles (`chainlint profiles` and `chainlint profiles show`)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from chainlint.report.escape import printable


def profile_line(path: Path, document: dict[str, Any]) -> str:
    files = document["source"]["files"]
    shown = (files[0]["path"] + (f" and {len(files) - 1} more" if len(files) > 1 else "")) if files else f"a {document['source']['kind']} frame"
    return printable(f"{document['name']:<24} {document['rows']:>12,} rows  {len(document['columns']):>3} columns  from {shown}  ({document['created']})")


def profile_summary(document: dict[str, Any], top: int = 5) -> str:
    lines = [
        f"profile {document['name']}: {document['rows']:,} rows, {len(document['columns'])} columns",
        f"  source: {', '.join(f['path'] for f in document['source']['files'])} ({document['source']['fingerprint'][:19]}…)",
        f"  made {document['created']} by chainlint {document['chainlint_version']}; "
        f"values under {document['settings']['min_count']} rows are not listed",
        "",
    ]
    for name, column in document["columns"].items():
        rows = max(column["rows"], 1)
        nulls = column["nulls"]
        head = f"{name}  ({column['type']})  nulls {nulls:,} ({nulls / rows:.1%})"
        distinct = column.get("distinct")
        if distinct:
            mark = "" if distinct["exact"] else f" ~±{3 * distinct['standard_error']:.1%}"
            # An estimate may pass the number of values there are: never show more than that.
            head += f"  distinct {min(distinct['value'], max(column['rows'] - nulls, 0)):,}{mark}"
        if column.get("redacted"):
            head += "  [redacted]"
        if column.get("unsummarised"):
            head += f"  not summarised ({column['unsummarised']})"
        lines.append(head)
        values = column.get("top", {}).get("values", [])[:top]
        if values:
            shares = ", ".join(f"{value!r} {count / rows:.1%}" for value, count in values)
            lines.append(f"    top: {shares}")
        if "min" in column:
            lines.append(f"    range: {column['min']} .. {column['max']}")
    return "".join(printable(line) + "\n" for line in lines)  # a column name may hold a line break
