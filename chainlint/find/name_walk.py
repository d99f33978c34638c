"""One walk over a statement or a scope: its names by role, and the names it reads through
text (a query's `@name`, the words of a `pd.eval`/`eval` string, any name where it calls `eval`,
`exec`, `locals`, `vars` or `globals`, or evaluates query text out of sight). The run scan
(`find/runs.py`) reads every statement's names from it, walked once."""

from __future__ import annotations

import ast
import re
from collections import Counter


#: Calls that read their caller's names at run time, out of the code's sight.
_DYNAMIC = frozenset({"eval", "exec", "locals", "vars", "globals"})
#: The key under which a statement that may read any name (`_DYNAMIC`) is counted.
ANY_NAME = "*"
_LOCAL = re.compile(r"@([A-Za-z_][A-Za-z_0-9]*)")
_WORD = re.compile(r"[A-Za-z_][A-Za-z_0-9]*")


class NameCounts:
    """What one walk of a node finds: how many times each name is read, bound or deleted, or
    declared `global`/`nonlocal` in code, and the names read through text (`count_names`)."""

    __slots__ = ("loads", "others", "declared", "text")

    def __init__(self, loads: Counter[str], others: Counter[str], declared: Counter[str], text: Counter[str]) -> None:
        self.loads = loads
        self.others = others
        self.declared = declared
        self.text = text

    def mentioned(self) -> set[str]:
        """Every name read or written, in code or through text."""
        return {*self.loads, *self.others, *self.text}

    def count_reads(self, into: Counter[str]) -> Counter[str]:
        """Add how many times each name is read, in code or through text. A name is read
        elsewhere than in a run when its scope reads it more often than the run's statements do
        (a read inside the run is a barrier of its own: a mask of another frame, or a name the
        run assigns); counting the scope once serves all its runs."""
        into.update(self.loads)
        into.update(self.text)
        return into

    def count_mentions(self, into: Counter[str]) -> Counter[str]:
        """Add how many times each name appears in any role (read, bound, deleted, declared
        `global` or `nonlocal`, read through text): a name a run binds may stop being bound only
        where the run's own statements are all its mentions in the scope."""
        for part in (self.loads, self.others, self.declared, self.text):
            into.update(part)
        return into


def count_names(node: ast.AST) -> NameCounts:
    """One walk of `node` collecting its names in code and the names read through text: `@name`
    in a `.query`/`.eval` string (pandas resolves it among the caller's variables), every word of
    a `pd.eval`/`eval` string, and `ANY_NAME` for a bare call of `eval`, `exec`, `locals`, `vars`
    or `globals`, or a `.query`/`.eval` whose text is not written in the call as a literal (held
    by a name, joined, formatted, an f-string with a placeholder: its names are out of the code's
    sight). More than pandas reads, never less. A string inside the arguments of several such
    calls counts once for each of them."""
    loads: Counter[str] = Counter()
    others: Counter[str] = Counter()
    declared: Counter[str] = Counter()
    text: Counter[str] = Counter()
    stack: list[tuple[ast.AST, tuple[re.Pattern[str], ...]]] = [(node, ())]
    while stack:
        node, patterns = stack.pop()
        kind = type(node)
        if kind is ast.Name:
            (loads if type(node.ctx) is ast.Load else others)[node.id] += 1  # type: ignore[attr-defined]
            continue
        if kind is ast.Constant:
            if patterns and isinstance(node.value, str):  # type: ignore[attr-defined]
                for pattern in patterns:
                    text.update(pattern.findall(node.value))  # type: ignore[attr-defined]
            continue
        if kind is ast.Global or kind is ast.Nonlocal:
            declared.update(node.names)  # type: ignore[attr-defined]
            continue
        if kind is ast.Call:
            func = node.func  # type: ignore[attr-defined]
            name = func.attr if type(func) is ast.Attribute else func.id if type(func) is ast.Name else None
            if type(func) is ast.Name and name in _DYNAMIC:
                text[ANY_NAME] += 1
            if name in ("query", "eval"):
                if not _literal_text(node):  # type: ignore[arg-type]
                    text[ANY_NAME] += 1
                inner = (*patterns, _WORD if name == "eval" else _LOCAL)
                stack.append((func, patterns))
                stack.extend((argument, inner) for argument in node.args)  # type: ignore[attr-defined]
                stack.extend((keyword, inner) for keyword in node.keywords)  # type: ignore[attr-defined]
                continue
        for field in node._fields:
            value = getattr(node, field, None)
            if isinstance(value, ast.AST):
                stack.append((value, patterns))
            elif isinstance(value, list):
                stack.extend((item, patterns) for item in value if isinstance(item, ast.AST))
    return NameCounts(loads, others, declared, text)


def _literal_text(call: ast.Call) -> bool:
    """Whether the text a `.query`/`.eval` call evaluates is a string literal in the call (a
    call without arguments, such as a model's `.eval()`, evaluates no text)."""
    if not call.args and not call.keywords:
        return True
    text = call.args[0] if call.args else next((k.value for k in call.keywords if k.arg in ("expr", None)), None)
    return isinstance(text, ast.Constant) and isinstance(text.value, str)
