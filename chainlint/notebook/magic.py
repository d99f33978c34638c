"""The IPython extension: `%load_ext chainlint`, then `%%chainlint` over a cell of chains.

The cell magic finds the cell's chains (the same finder as `check`), binds each chain's frame
to the live DataFrame of that name in the kernel, and plans it with statistics of that frame:
column statistics and exact joint counts of the chain's own predicates, computed by evaluating
chainlint's predicate IR on the frame. The cell's code is never run; `--time` times both
orders built from chainlint's predicates (as `chainlint measure` does), not the cell's code.
`--replace` puts the planned form into the cell in place of the magic and its text. The
configuration nearest the kernel's folder applies as in `check`, through the engine's one
options function: its thresholds keep the written order, its store and cost model, and its
bindings for a chain whose frame is not in the kernel (planned with the store's profile).

`%chainlint profile FRAME --name NAME` profiles a live frame into the project's store, in the
same profile format as `chainlint profile`, so that what was explored here serves CI.
"""

from __future__ import annotations

import argparse
import shlex
from dataclasses import replace
from pathlib import Path
from typing import Any

from chainlint.config import ConfigError
from chainlint.engine.check import plan_chains
from chainlint.engine.options import Options, load_options
from chainlint.engine.run import analyse_source
from chainlint.estimate.stores import LoadedStores
from chainlint.model import Chain, Edit, Finding
from chainlint.notebook.live import MagicError, measure_text, plan_on_frame, profile_into_store
from chainlint.parse.notebooks import analysable
from chainlint.parse.source import text_source
from chainlint.profile.store import find_store
from chainlint.report.explain import explain_text

_PARSER = argparse.ArgumentParser(prog="%%chainlint", add_help=False, exit_on_error=False)
_PARSER.add_argument("--time", action="store_true", help="also time both orders on the live frame")
_PARSER.add_argument("--repeat", type=int, default=5, help="timed runs of each order (with --time)")
_PARSER.add_argument("--replace", action="store_true", help="replace the cell's text with the planned form")

_PROFILE = argparse.ArgumentParser(prog="%chainlint profile", add_help=False, exit_on_error=False)
_PROFILE.add_argument("frame")
_PROFILE.add_argument("--name", required=True)
_PROFILE.add_argument("--store", default=None)
_PROFILE.add_argument("--min-count", type=int, default=5)

USAGE = (
    "usage: %%chainlint [--time] [--repeat N] [--replace]  (a cell of chains)\n"
    "       %chainlint profile FRAME --name NAME [--store DIR] [--min-count N]"
)


def load(ipython: Any) -> None:
    """Register `%chainlint` / `%%chainlint` with the shell."""
    ipython.register_magic_function(lambda line, cell=None: chainlint_magic(ipython, line, cell), "line_cell", "chainlint")


def chainlint_magic(shell: Any, line: str, cell: str | None) -> None:
    try:
        if cell is None:
            print(_line_magic(shell, line))
        else:
            print(plan_cell(shell, line, cell), end="")
    except MagicError as error:
        print(f"chainlint: {error}")


def _parse(parser: argparse.ArgumentParser, line: str) -> argparse.Namespace:
    try:
        options, extra = parser.parse_known_args(shlex.split(line))
    except (argparse.ArgumentError, ValueError) as error:
        raise MagicError(f"{error}\n{USAGE}") from None
    if extra:
        raise MagicError(f"unknown arguments: {' '.join(extra)}\n{USAGE}")
    return options


def _line_magic(shell: Any, line: str) -> str:
    words = line.split(maxsplit=1)
    if not words or words[0] != "profile":
        raise MagicError(USAGE)
    options = _parse(_PROFILE, words[1] if len(words) > 1 else "")
    frame = live_frame(shell, options.frame)
    store = Path(options.store) if options.store else project_options().store
    return profile_into_store(frame, options.name, store, options.min_count)


def project_options() -> Options:
    """The options `check` would use here: the configuration nearest the kernel's folder (the
    notebook's, in Jupyter), through the engine's one options function."""
    folder = Path.cwd()
    try:
        return load_options(folder, folder)
    except ConfigError as error:
        raise MagicError(str(error)) from None


def live_frame(shell: Any, name: str) -> Any:
    """The DataFrame bound to `name` in the kernel, or a MagicError saying why there is none."""
    import pandas as pd

    if not name.isidentifier():
        raise MagicError(f"the frame `{name}` is an expression; the magic binds frames by name only")
    if name not in shell.user_ns:
        raise MagicError(f"the frame `{name}` is not defined in the kernel (run the cell that makes it first)")
    value = shell.user_ns[name]
    if not isinstance(value, pd.DataFrame):
        raise MagicError(f"`{name}` is a {type(value).__name__}, not a pandas DataFrame")
    return value


def cell_chains(cell: str) -> tuple[str, list[Chain]]:
    """The cell's text as analysed (IPython syntax masked) and its chains. Lines are counted
    as the cell shows them, from its `%%chainlint` line: the text starts with an empty line."""
    masked, problem = analysable("\n" + cell)
    if problem is not None:
        line, column, message = problem
        raise MagicError(f"line {line}, column {column}: {message}")
    result = analyse_source(text_source("<cell>", masked))
    if result.errors:
        error = result.errors[0]
        raise MagicError(f"line {error.line}, column {error.column}: {error.message}")
    return masked, list(result.chains)


def plan_cell(shell: Any, line: str, cell: str) -> str:
    """The plan of every chain of the cell on the live frames; may replace the cell's text."""
    from chainlint.engine.fixes import fix_finding
    from chainlint.rules.reorder import RULE as REORDER

    options = _parse(_PARSER, line)
    masked, chains = cell_chains(cell)
    if not chains:
        raise MagicError("no chain of row filters in this cell")
    settings = project_options()
    loaded = LoadedStores().load((settings.store or find_store(Path.cwd())).resolve())
    source = text_source("<cell>", masked)
    parts, edits, unplanned = [], [], 0
    for chain in chains:
        head = f"line {chain.span.line}: "
        try:
            frame = live_frame(shell, chain.frame)
        except MagicError as error:
            # No live frame: bound as `check` binds it (a comment, the configuration's bindings,
            # the one profile of the store holding its columns), else not planned.
            (stored,) = plan_chains([chain], loaded, settings)
            if stored.plan is None:
                parts.append(f"{head}chain on `{chain.frame}` not planned: {error}\n")
                unplanned += 1
                continue
            frame, plan = None, stored.plan
            shown = replace(chain, path="cell")
            parts.append(explain_text([replace(stored, chain=shown, plan=replace(plan, chain=shown))]))
        else:
            item = plan_on_frame(chain, frame, settings, loaded.model)
            plan = item.plan
            parts.append(item.text)
        if options.time and frame is not None:
            parts.append(measure_text(frame, plan, options.repeat))
        if not plan.as_written:
            proposed = Finding(REORDER.name, source.path, chain.span, "", order=plan.order, groups=plan.groups)
            fixed = fix_finding(source, chain, proposed)
            if fixed.fix is None:
                parts.append(f"  the planned form cannot be written: {fixed.fix_error}\n")
            else:
                edits.append(fixed.fix)
    if options.replace:
        if unplanned:
            parts.append("the cell was left as written: some chains were not planned\n")
        elif not edits:
            parts.append("the cell was left as written: it is already in the planned order\n")
        else:
            # IPython hands the body over with a newline added; the cell did not show it.
            shell.set_next_input(_restore("\n" + cell, masked, edits)[1:].removesuffix("\n"), replace=True)
            parts.append("the cell now holds the planned form (run it to use it)\n")
    return "".join(parts)


def _restore(cell: str, masked: str, edits: list[Edit]) -> str:
    """The cell's own text (IPython lines included) with the edits applied."""
    for edit in sorted(edits, key=lambda e: e.start, reverse=True):
        if masked[edit.start : edit.end] != cell[edit.start : edit.end]:
            raise MagicError("a chain runs through IPython syntax; the cell was left as written")
        cell = cell[: edit.start] + edit.text + cell[edit.end :]
    return cell
