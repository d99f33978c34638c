"""The run scan's one walk over a statement (`find.name_walk.count_names`) against the plain
definition it replaced: names from `ast.walk` by role, and names read through text from a
second walk over each `query`/`eval` call's arguments (the standard library's `ast.walk` is
the reference)."""

from __future__ import annotations

import ast
import re
from collections import Counter
from pathlib import Path

import pytest

from chainlint.find.name_walk import ANY_NAME, count_names

ROOT = Path(__file__).parent.parent
LOCAL = re.compile(r"@([A-Za-z_][A-Za-z_0-9]*)")
WORD = re.compile(r"[A-Za-z_][A-Za-z_0-9]*")

HOSTILE = '''
out = df.query("a > @low and b < @high", local_dict={"x": "@other"})
out = pd.eval("df.a + lim", engine=f"{kind}")
out = df.eval(pd.eval("w @q"), inplace=False).query(df.query("@inner").eval("@deep"))
eval("x"); exec(code); locals(); vars(obj); globals()
obj.eval("y").locals()
def f():
    global g
    nonlocal_ = 1
    del g
    (w := df.query(f"c == @{name}"))
    out = df.query(Q).eval(expr="a + 1").query(**options)
class K:
    x = df.query("@cls_name")
lambda d: d.query("@in_lambda")
'''


def _reference(node: ast.AST) -> tuple[Counter[str], Counter[str], Counter[str]]:
    """(reads, mentions, text reads) as two walks find them."""
    text: list[str] = []
    for call in ast.walk(node):
        if not isinstance(call, ast.Call):
            continue
        func = call.func
        name = func.attr if isinstance(func, ast.Attribute) else func.id if isinstance(func, ast.Name) else None
        if isinstance(func, ast.Name) and name in ("eval", "exec", "locals", "vars", "globals"):
            text.append(ANY_NAME)
        if name in ("query", "eval"):
            written = call.args[0] if call.args else next((k.value for k in call.keywords if k.arg in ("expr", None)), None)
            if (call.args or call.keywords) and not (isinstance(written, ast.Constant) and isinstance(written.value, str)):
                text.append(ANY_NAME)  # text out of sight may read any name
            for argument in [*call.args, *(k.value for k in call.keywords)]:
                for found in ast.walk(argument):
                    if isinstance(found, ast.Constant) and isinstance(found.value, str):
                        text.extend((WORD if name == "eval" else LOCAL).findall(found.value))
    reads = Counter(n.id for n in ast.walk(node) if isinstance(n, ast.Name) and isinstance(n.ctx, ast.Load))
    reads.update(text)
    mentions: Counter[str] = Counter()
    for n in ast.walk(node):
        if isinstance(n, ast.Name):
            mentions[n.id] += 1
        elif isinstance(n, (ast.Global, ast.Nonlocal)):
            mentions.update(n.names)
    mentions.update(text)
    return reads, mentions, Counter(text)


def _sources() -> list[tuple[str, str]]:
    files = sorted((ROOT / "tests" / "fixtures" / "finder").glob("*.py")) + [ROOT / "examples" / "pipeline.py"]
    return [("hostile", HOSTILE)] + [(path.name, path.read_text()) for path in files]


@pytest.mark.parametrize(("label", "text"), _sources(), ids=[label for label, _ in _sources()])
def test_one_walk_finds_what_two_walks_found(label: str, text: str) -> None:
    tree = ast.parse(text)
    nodes = [tree, *(n for n in ast.walk(tree) if isinstance(n, (ast.stmt, ast.expr)))]
    for node in nodes:
        reads, mentions, text_read = _reference(node)
        counts = count_names(node)
        assert counts.count_reads(Counter()) == reads, ast.unparse(node)
        assert counts.count_mentions(Counter()) == mentions, ast.unparse(node)
        assert counts.text == text_read
        assert counts.mentioned() == {n.id for n in ast.walk(node) if isinstance(n, ast.Name)} | set(text_read)


def test_the_hostile_sample_reads_through_text() -> None:
    counts = count_names(ast.parse(HOSTILE))
    assert {"low", "high", "other", "lim", "q", "inner", "deep", "in_lambda", "cls_name"} <= set(counts.text)
    # eval, exec, locals, vars, globals called bare (obj.eval is a method), and five calls whose
    # text is not a literal in the call: the f-string, the two whose text is a call, `Q`, `**options`.
    assert counts.text[ANY_NAME] == 10
