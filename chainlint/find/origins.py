"""Where a chain's frame comes from, as far as the code says: what the binding stage needs.

Recorded per scope while the finder walks statements in order: `x = pd.read_parquet("f")`
(with a literal path or a name the code binds to one string), function parameters, and
`# chainlint: profile=NAME` comments on the assigning statement.
"""

from __future__ import annotations

import ast
import re
from collections.abc import Callable
from dataclasses import dataclass, field

from chainlint.find.bindings import VALUE, Resolved
from chainlint.model import FrameOrigin

PROFILE_COMMENT = re.compile(r"#\s*chainlint:\s*profile\s*=\s*([A-Za-z0-9][A-Za-z0-9_.\-]*)")
READERS = frozenset({"read_csv", "read_parquet", "read_feather", "read_json"})


KEEP_COMMENT = re.compile(r"#\s*chainlint:\s*keep\b([ \t\w,-]*)")


def keep_comment(line: str) -> tuple[str, ...] | None:
    """The rules `# chainlint: keep [RULE...]` names (empty: every rule), or None."""
    match = KEEP_COMMENT.search(line)
    if match is None:
        return None
    return tuple(sorted(r for r in re.split(r"[\s,]+", match.group(1)) if r))


def profile_comment(line: str) -> str | None:
    match = PROFILE_COMMENT.search(line)
    return match.group(1) if match else None


READ_OPTIONS = frozenset({"sep", "delimiter", "header", "skiprows", "na_values", "dtype", "parse_dates", "encoding"})


def _frozen(value: object) -> object:
    if isinstance(value, (list, tuple)):
        return tuple(_frozen(v) for v in value)
    if isinstance(value, dict):
        return tuple((k, _frozen(v)) for k, v in value.items())
    return value


def read_options(call: ast.expr) -> tuple[tuple[str, object], ...]:
    """The reader options a read call passes as literals, in keyword order; others are left out."""
    found = []
    for keyword in call.keywords if isinstance(call, ast.Call) else ():
        if keyword.arg in READ_OPTIONS:
            try:
                found.append((keyword.arg, _frozen(ast.literal_eval(keyword.value))))
            except (ValueError, TypeError, SyntaxError, MemoryError, RecursionError):
                continue
    return tuple(found)


@dataclass
class Scope:
    parameters: frozenset[str] = frozenset()
    assigned: dict[str, FrameOrigin] = field(default_factory=dict)


class Origins:
    """Scopes from the module inward; lookups fall back outward as Python's closures do."""

    def __init__(self, pandas: frozenset[str], lines: tuple[str, ...], resolve: Callable[[str], Resolved]) -> None:
        self.pandas = pandas
        self.lines = lines
        #: What a name holds where the finder is (the one resolver of the module's constants).
        self.resolve = resolve
        self.scopes: list[Scope] = [Scope()]

    def enter(self, function: ast.FunctionDef | ast.AsyncFunctionDef | None) -> None:
        names: set[str] = set()
        if function is not None:
            arguments = function.args
            for argument in arguments.posonlyargs + arguments.args + arguments.kwonlyargs:
                names.add(argument.arg)
        self.scopes.append(Scope(frozenset(names)))

    def leave(self) -> None:
        self.scopes.pop()

    def comment_on(self, statement: ast.stmt) -> str | None:
        for number in range(statement.lineno, (statement.end_lineno or statement.lineno) + 1):
            found = profile_comment(self.lines[number - 1]) if number <= len(self.lines) else None
            if found:
                return found
        return None

    def record(self, statement: ast.stmt) -> None:
        """Note what a statement binds, after the finder has looked at it."""
        if not isinstance(statement, ast.Assign) or len(statement.targets) != 1:
            return
        target = statement.targets[0]
        if not isinstance(target, ast.Name):
            return
        value = statement.value
        reader, path = self.reader_call(value)
        kind = "read" if reader else "assigned"
        options = read_options(value) if reader else ()
        self.scopes[-1].assigned[target.id] = FrameOrigin(target.id, kind, reader, path, self.comment_on(statement), options)

    def reader_call(self, value: ast.expr) -> tuple[str | None, str | None]:
        """`("read_parquet", "data/x.parquet")` for `pd.read_parquet("data/x.parquet")`."""
        if not (isinstance(value, ast.Call) and isinstance(value.func, ast.Attribute)):
            return None, None
        func = value.func
        if not (isinstance(func.value, ast.Name) and func.value.id in self.pandas and func.attr in READERS):
            return None, None
        argument = value.args[0] if value.args else next((k.value for k in value.keywords if k.arg in ("path", "filepath_or_buffer", "path_or_buf")), None)
        if isinstance(argument, ast.Constant) and isinstance(argument.value, str):
            return func.attr, argument.value
        if isinstance(argument, ast.Name):
            found = self.resolve(argument.id)
            return func.attr, found.value if found.kind == VALUE and isinstance(found.value, str) else None
        return func.attr, None

    def lookup(self, name: str | None, base: ast.expr) -> FrameOrigin | None:
        reader, path = self.reader_call(base)
        if reader:
            return FrameOrigin(name or "", "read", reader, path, None, read_options(base))
        if name is None:
            return None
        for scope in reversed(self.scopes):
            if name in scope.assigned:
                return scope.assigned[name]
            if name in scope.parameters:
                return FrameOrigin(name, "parameter", None, None, None)
        return FrameOrigin(name, "unknown", None, None, None)
