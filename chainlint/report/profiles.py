"""Readable summaries of profiles (`chainlint profiles` and `chainlint profiles show`)."""

from __future__ import annotations

from pathlib import Path

from chainlint.profile.view import Profile
from chainlint.report.escape import printable


def profile_line(path: Path, profile: Profile) -> str:
    files = profile.source.files
    shown = (files[0].path + (f" and {len(files) - 1} more" if len(files) > 1 else "")) if files else f"a {profile.source.kind} frame"
    return printable(f"{profile.name:<24} {profile.rows:>12,} rows  {len(profile.columns):>3} columns  from {shown}  ({profile.created})")


def profile_summary(profile: Profile, top: int = 5) -> str:
    lines = [
        f"profile {profile.name}: {profile.rows:,} rows, {len(profile.columns)} columns",
        f"  source: {', '.join(f.path for f in profile.source.files)} ({profile.source.fingerprint[:19]}…)",
        f"  made {profile.created} by chainlint {profile.chainlint_version}; "
        f"values under {profile.settings.min_count} rows are not listed",
        "",
    ]
    for column in profile.columns:
        rows = max(column.rows, 1)
        nulls = column.nulls
        head = f"{column.name}  ({column.dtype})  nulls {nulls:,} ({nulls / rows:.1%})"
        distinct = column.distinct
        if distinct:
            mark = "" if distinct.exact else f" ~±{3 * (distinct.standard_error or 0.0):.1%}"
            # An estimate may pass the number of values there are: never show more than that.
            head += f"  distinct {min(distinct.value, max(column.rows - nulls, 0)):,}{mark}"
        if column.redacted:
            head += "  [redacted]"
        if column.unsummarised:
            head += f"  not summarised ({column.unsummarised})"
        lines.append(head)
        values = column.top.values[:top] if column.top else ()
        if values:
            shares = ", ".join(f"{value!r} {count / rows:.1%}" for value, count in values)
            lines.append(f"    top: {shares}")
        if column.bounds is not None:
            lines.append(f"    range: {column.bounds[0]} .. {column.bounds[1]}")
    return "".join(printable(line) + "\n" for line in lines)  # a column name may hold a line break
