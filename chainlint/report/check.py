"""`chainlint check` output: GNU `path:line:col: rule: message` lines and a summary, or JSON.

In a notebook the line is counted within its cell and the message starts with `cell N: `
(N counts all the notebook's cells from 1, as editors show them); JSON carries `cell`.
"""

from __future__ import annotations

import json
import re
import shlex
from collections import Counter
from pathlib import Path
from typing import Any

from chainlint.engine.check import CheckResult, error_order
from chainlint.model import Cell, FileProblem, Finding, OriginKind
from chainlint.profile.errors import DataError
from chainlint.profile.read_options import command_flags, options_from_code
from chainlint.profile.store import StoreError, list_profiles
from chainlint.report.escape import encodable, printable
from chainlint.report.explain import cell_record, error_record


def cell_prefix(cell: Cell | None) -> str:
    return "" if cell is None else f"cell {cell.number}: "


def error_line(error: FileProblem) -> str:
    return printable(f"{error.path}:{error.line}:{error.column}: error: {cell_prefix(error.cell)}{error.message}")


def finding_record(finding: Finding) -> dict[str, Any]:
    return {
        "rule": finding.rule,
        "path": finding.path,
        "cell": cell_record(finding.cell),
        "line": finding.span.line,
        "column": finding.span.column,
        "end_line": finding.span.end_line,
        "end_column": finding.span.end_column,
        "message": finding.message,
        "speedup": None if finding.speedup is None else round(finding.speedup, 4),
        "current_seconds": None if finding.current_seconds is None else round(finding.current_seconds, 6),
        "planned_seconds": None if finding.planned_seconds is None else round(finding.planned_seconds, 6),
        "order": None if finding.order is None else list(finding.order),
        "groups": None if finding.groups is None else [list(g) for g in finding.groups],
        "fix": None if finding.fix is None else {
            "line": finding.fix.span.line,
            "column": finding.fix.span.column,
            "end_line": finding.fix.span.end_line,
            "end_column": finding.fix.span.end_column,
            "text": finding.fix.text,
        },
        "fix_error": finding.fix_error,
    }


def check_json(result: CheckResult) -> str:
    document = {
        "findings": [finding_record(f) for f in result.findings],
        "suppressed": len(result.suppressed),
        "errors": [error_record(e) for e in sorted(result.errors, key=error_order)],
        "not_planned": unplanned_record(result),
    }
    return json.dumps(encodable(document), indent=2, ensure_ascii=False) + "\n"


def check_lines(result: CheckResult) -> list[str]:
    lines = []
    for f in result.findings:
        cell = cell_prefix(f.cell)
        lines.append(printable(f"{f.path}:{f.span.line}:{f.span.column}: {f.rule}: {cell}{f.message}"))
        if f.fix_error:
            lines.append(printable(f"{f.path}:{f.span.line}:{f.span.column}: note: {cell}no automatic fix: {f.fix_error}"))
    return lines


def check_summary(result: CheckResult, fixed: int = 0) -> str:
    """One line; `fixed` findings were rewritten and are no longer counted as findings."""
    chains = len(result.chains)
    bound = sum(1 for c in result.chains if c.plan is not None)
    by_rule = Counter(f.rule for f in result.findings)
    if result.findings:
        parts = ", ".join(f"{count} {rule}" for rule, count in sorted(by_rule.items()))
        head = f"{len(result.findings)} finding{'s' if len(result.findings) != 1 else ''} ({parts})"
    else:
        head = "no findings"
    text = f"{head}; {chains} chain{'s' if chains != 1 else ''} in {result.files} file{'s' if result.files != 1 else ''}, {bound} planned with a profile"
    if fixed:
        text = f"{fixed} fixed; " + text
    if result.suppressed:
        text += f"; {len(result.suppressed)} kept as written by a `chainlint: keep` comment"
    if result.errors:
        text += f"; {len(result.errors)} error{'s' if len(result.errors) != 1 else ''}"
    return text + "".join("\n" + printable(line) for line in unplanned_lines(result))


def _listed(store: Path) -> bool:
    """Whether the store lists profiles; one that cannot be listed is already an error."""
    try:
        return bool(list_profiles(store))
    except StoreError:
        return True


def unplanned_lines(result: CheckResult) -> list[str]:
    """Why chains were not planned, naming the store once, and the command that would make a
    profile for them: so that a repository without profiles does not read as all good."""
    record = unplanned_record(result)
    if record is None:
        return []
    commands = record["commands"]
    lines = [record["summary"]] + [f"  to profile their data: {command}" for command in commands[:3]]
    if len(commands) > 3:
        lines.append(f"  ... and {len(commands) - 3} more data files the code reads")
    return lines


def unplanned_record(result: CheckResult) -> dict[str, Any] | None:
    """`{"chains", "summary", "commands"}` for the chains no profile describes, or None."""
    unbound = [c for c in result.chains if c.plan is None]
    if not unbound:
        return None
    stores = sorted({shown_path(c.store, result.root) for c in unbound if c.store is not None})
    where = stores[0] if len(stores) == 1 else f"{len(stores)} stores"
    count = f"{len(unbound)} chain{'s' if len(unbound) != 1 else ''}"
    if all(c.store is not None and not _listed(c.store) for c in unbound):
        summary = f"{count} not planned: no profile in {where}"
    else:
        summary = (f"{count} not planned: no profile in {where} describes {'them' if len(unbound) != 1 else 'it'} "
                   "(`chainlint explain` says why for each)")
    reads = {(c.chain.origin.path, c.chain.origin.read_options) for c in unbound
             if c.chain.origin and c.chain.origin.kind is OriginKind.READ and c.chain.origin.path}
    paths = sorted({path for path, _ in reads})
    commands = [_command(path, {options for p, options in reads if p == path}) for path in paths]
    if len(paths) < len(unbound) and not commands:
        commands = ["chainlint profile DATA --name NAME"]
    return {"chains": len(unbound), "summary": summary, "commands": commands}


def _command(path: str, options: set[tuple[tuple[str, object], ...]]) -> str:
    """The profile command for a data file, with the reader options the code passes to it
    (when every read of it passes the same ones, and chainlint can follow them)."""
    command = f"chainlint profile {shlex.quote(path)} --name {profile_name(path)}"
    if len(options) == 1 and path.lower().endswith((".csv", ".csv.gz", ".tsv", ".tsv.gz", ".csv.bz2")):
        try:
            flags = command_flags(options_from_code(options.pop()))
        except DataError:
            flags = ""
        command += f" {flags}" if flags else ""
    return command


def shown_path(folder: Path, root: Path) -> str:
    """A folder relative to `root` when it lies inside it."""
    try:
        return str(folder.relative_to(root)) or "."
    except ValueError:
        return str(folder)


def profile_name(path: str) -> str:
    """A profile name for a data file: its name without suffixes, in the characters names allow."""
    stem = path.replace("\\", "/").rstrip("/").rsplit("/", 1)[-1].split(".")[0]
    name = re.sub(r"[^A-Za-z0-9_.-]+", "_", stem).strip("_.-")
    return name or "data"
