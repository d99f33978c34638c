"""Where a chain's frame comes from, as far as the code says: what the binding stage needs.

Recorded per scope while the finder walks statements in order: `x = pd.read_parquet("f")`
(with a literal path or a name the code binds to one string), function parameters, and
`# chainlint: profile=NAME` comments on the assigning statement.
"""

from __future__ import annotations

import ast
import re
from collections.abc import Callable
from typing import TypeVar

from chainlint.model import FrameOrigin, OriginKind
from chainlint.find.bindings import VALUE, ModuleBindings
from chainlint.find.scopes import parameters

PROFILE_COMMENT = re.compile(r"#\s*chainlint:\s*profile\s*=\s*([A-Za-z0-9][A-Za-z0-9_.\-]*)")
READERS = frozenset({"read_csv", "read_parquet", "read_feather", "read_json"})
T = TypeVar("T")


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


def near(lines: tuple[str, ...], line: int, read: Callable[[str], T | None]) -> T | None:
    """What `read` finds in a comment on line `line` (1-based) or, failing that, the line above."""
    found = directive_near(lines, line, read)
    return None if found is None else found[1]


def directive_near(lines: tuple[str, ...], line: int, read: Callable[[str], T | None]) -> tuple[int, T] | None:
    """The one walk over a chain's line and the line above it for a `# chainlint:` directive:
    the number of the line where `read` finds one, and what it says."""
    for number in (line, line - 1):
        if 0 < number <= len(lines):
            found = read(lines[number - 1])
            if found is not None:
                return number, found
    return None


READ_OPTIONS = frozenset({"sep", "delimiter", "header", "skiprows", "na_values", "dtype", "parse_dates", "encoding"})


def _frozen(value: object) -> object:
    if isinstance(value, (list, tuple)):
        return tuple(_frozen(v) for v in value)
    if isinstance(value, dict):
        return tuple((k, _frozen(v)) for k, v in value.items())
    return value


#: Read options that leave the dtypes of the columns read as a profile records them.
SAME_DTYPES = frozenset({"filepath_or_buffer", "path", "path_or_buf", "columns", "usecols", "index_col", "compression",
                         "storage_options", "memory_map", "encoding_errors", "filters", "low_memory"})
#: Python's type names as `dtype=` takes them, by the dtype pandas 3 gives.
_TYPE_NAMES = {"object": "object", "str": "str", "int": "int64", "float": "float64", "bool": "bool"}


def _literal(keyword: ast.keyword) -> object:
    """A read option's literal value; `dtype=` may also name Python's types (`{'s': object}`)."""
    value = keyword.value
    if keyword.arg == "dtype":
        if isinstance(value, ast.Name) and value.id in _TYPE_NAMES:
            return _TYPE_NAMES[value.id]
        if isinstance(value, ast.Dict) and all(isinstance(v, ast.Name) and v.id in _TYPE_NAMES or isinstance(v, ast.Constant)
                                               for v in value.values):
            value = ast.Dict(value.keys, [ast.Constant(_TYPE_NAMES[v.id]) if isinstance(v, ast.Name) else v for v in value.values])
    return _frozen(ast.literal_eval(value))


def read_options(call: ast.expr) -> tuple[tuple[str, object], ...]:
    """The reader options a read call passes as literals, in keyword order; others are left out."""
    found = []
    for keyword in call.keywords if isinstance(call, ast.Call) else ():
        if keyword.arg in READ_OPTIONS:
            try:
                found.append((keyword.arg, _literal(keyword)))
            except (ValueError, TypeError, SyntaxError, MemoryError, RecursionError):
                continue
    return tuple(found)


def unfollowed_options(call: ast.expr) -> tuple[str, ...]:
    """The options of a read call that may give other dtypes than a profile records and that
    chainlint does not follow (`converters`, `dtype_backend`, `names`, `nrows`, a followed one not
    written as a literal, `**`): every option but those of `SAME_DTYPES` and the literal ones of
    `READ_OPTIONS`."""
    followed = {name for name, _ in read_options(call)}
    return tuple(k.arg or "**" for k in (call.keywords if isinstance(call, ast.Call) else ())
                 if k.arg not in SAME_DTYPES and k.arg not in followed)


class Origins:
    """What each name of the scopes being walked was last assigned from, from the module
    inward; lookups fall back outward as Python's closures do. A function's parameters are read
    as the module's scope table reads them (`scopes.parameters`), without building the table:
    an editor that walks one function again does not collect every scope of the module."""

    def __init__(
        self, pandas: frozenset[str], lines: tuple[str, ...], bindings: ModuleBindings, where: Callable[[], ast.AST | None],
    ) -> None:
        self.pandas = pandas
        self.lines = lines
        self.bindings = bindings
        #: The scope the finder is in (for a path held in a name).
        self.where = where
        #: Per scope walked: its function (None for the module and class bodies) and what the
        #: names of that scope were assigned from, so far.
        self.scopes: list[tuple[ast.AST | None, dict[str, FrameOrigin]]] = [(None, {})]
    def enter(self, function: ast.FunctionDef | ast.AsyncFunctionDef | None) -> None:
        self.scopes.append((function, {}))

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
        kind = OriginKind.READ if reader else OriginKind.ASSIGNED
        options = read_options(value) if reader else ()
        unfollowed = unfollowed_options(value) if reader else ()
        self.scopes[-1][1][target.id] = FrameOrigin(target.id, kind, reader, path, self.comment_on(statement), options, unfollowed)

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
            found = self.bindings.resolve(argument.id, self.where())
            return func.attr, found.value if found.kind == VALUE and isinstance(found.value, str) else None
        return func.attr, None

    def lookup(self, name: str | None, base: ast.expr) -> FrameOrigin | None:
        reader, path = self.reader_call(base)
        if reader:
            return FrameOrigin(name or "", OriginKind.READ, reader, path, None, read_options(base), unfollowed_options(base))
        if name is None:
            return None
        for function, assigned in reversed(self.scopes):
            if name in assigned:
                return assigned[name]
            if function is not None and any(p.arg == name for p in parameters(function.args)):  # type: ignore[attr-defined]
                return FrameOrigin(name, OriginKind.PARAMETER, None, None, None)
        return FrameOrigin(name, OriginKind.UNKNOWN, None, None, None)
