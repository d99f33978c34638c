"""The rewrite's plumbing: comments follow their step and never end up before code, the whole
statement is verified, class bodies get no new lambdas, and chains that share a start or nest
each get their own fix."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from chainlint.engine.run import analyse_file, analyse_source
from chainlint.model import Finding
from chainlint.parse.source import text_source
from chainlint.rewrite.fixes import attach_fixes
from chainlint.rewrite.permute import RewriteError, apply_edits, chain_edit
from chainlint.rewrite.verify import verify


def _rewrite(before: str, order: tuple[int, ...], index: int = 0) -> str:
    source = text_source("case.py", before)
    chain = analyse_source(source).chains[index]
    new = apply_edits(before, [chain_edit(source, chain, order)])
    verify(source, new, [(chain, order)])
    return new


def _comments(text: str) -> list[str]:
    return sorted(line[line.index("#"):].strip() for line in text.splitlines() if "#" in line)


# -- C: a moved comment never swallows code ------------------------------------------------
def test_a_trailing_comment_landing_before_code_goes_after_the_code() -> None:
    before = (
        "out = (\n    scans\n    .loc[lambda d: d.a > 1]  # heavy\n"
        "    .query('b == 2').reset_index(drop=True)\n)\n"
    )
    new = _rewrite(before, (1, 0))
    assert "reset_index" in ast.dump(ast.parse(new))
    assert "    .loc[lambda d: d.a > 1].reset_index(drop=True)  # heavy\n" in new
    assert _comments(new) == _comments(before)


def test_verification_compares_the_whole_statement() -> None:
    """A rewritten text that comments out code after the chain is refused."""
    before = (
        "out = (\n    scans\n    .loc[lambda d: d.a > 1]  # heavy\n"
        "    .query('b == 2').reset_index(drop=True)\n)\n"
    )
    swallowed = (
        "out = (\n    scans\n    .query('b == 2')\n"
        "    .loc[lambda d: d.a > 1]  # heavy.reset_index(drop=True)\n)\n"
    )
    source = text_source("case.py", before)
    chain = analyse_source(source).chains[0]
    with pytest.raises(RewriteError):
        verify(source, swallowed, [(chain, (1, 0))])


def test_a_comment_that_cannot_follow_its_step_refuses_the_rewrite() -> None:
    before = "x = raw.loc[lambda d: d.a > 1]  # wide\nx = x.query('b == 2')[lambda d: d.c == 3]\n"
    source = text_source("case.py", before)
    chain = analyse_source(source).chains[0]
    with pytest.raises(RewriteError, match="comment"):
        chain_edit(source, chain, (1, 0, 2))


# -- H: comments above a step and in statement runs follow it; directives stay --------------
def test_comments_above_a_step_follow_it() -> None:
    before = (
        "out = (\n    scans\n    # keeps most rows\n    .loc[lambda d: d.a > 1]  # common\n"
        "    # the rare one\n    .query('b == 2')  # rare\n)\n"
    )
    assert _rewrite(before, (1, 0)) == (
        "out = (\n    scans\n    # the rare one\n    .query('b == 2')  # rare\n"
        "    # keeps most rows\n    .loc[lambda d: d.a > 1]  # common\n)\n"
    )


def test_comments_of_a_statement_run_follow_their_step() -> None:
    before = (
        "x = raw[raw.a > 1]  # most rows\n# only damaged parcels\n"
        "x = x.query('b == 2')  # rare\n"
    )
    assert _rewrite(before, (1, 0)) == (
        "# only damaged parcels\nx = raw.query('b == 2')  # rare\n"
        "x = x[lambda raw: raw.a > 1]  # most rows\n"
    )


def test_the_profile_comment_stays_with_the_chain() -> None:
    before = (
        "out = (\n    scans.loc[lambda d: d.a > 1]  # chainlint: profile=parcel_scans\n"
        "    .query('b == 2')  # rare\n)\n"
    )
    new = _rewrite(before, (1, 0))
    (chain,) = analyse_source(text_source("case.py", new)).chains
    assert chain.profile_comment == "parcel_scans"
    assert new.splitlines()[1].endswith("# chainlint: profile=parcel_scans")


def test_a_run_keeps_its_profile_comment() -> None:
    before = "x = raw[raw.a > 1]  # chainlint: profile=parcel_scans\n# rare\nx = x.query('b == 2')\n"
    new = _rewrite(before, (1, 0))
    assert new == "# rare\nx = raw.query('b == 2')  # chainlint: profile=parcel_scans\nx = x[lambda raw: raw.a > 1]\n"
    (chain,) = analyse_source(text_source("case.py", new)).chains
    assert chain.profile_comment == "parcel_scans"


def test_comments_never_move_under_a_directive_above_a_run() -> None:
    """The directive binds the run only from the line right above it: moving the comment
    lines between them would change the binding."""
    before = "# chainlint: profile=parcel_scans\n# wide\nx = raw[raw.a > 1]\n# rare\nx = x.query('b == 2')\n"
    source = text_source("case.py", before)
    (chain,) = analyse_source(source).chains
    with pytest.raises(RewriteError, match="comment"):
        chain_edit(source, chain, (1, 0))


def test_cr_only_file_with_a_comment_between_frame_and_step() -> None:
    before = "out = (\r    scans  # the frame\r    .loc[lambda d: d.a > 1]\r    .query('b == 2')\r)\r"
    source = text_source("cr.py", before)
    (chain,) = analyse_source(source).chains
    for step in chain.steps:
        assert (step.span.line, step.span.column) < (step.span.end_line, step.span.end_column)
    assert _rewrite(before, (1, 0)) == "out = (\r    scans  # the frame\r    .query('b == 2')\r    .loc[lambda d: d.a > 1]\r)\r"


# -- D: class bodies -----------------------------------------------------------------------
def test_no_lambda_is_made_in_a_class_body() -> None:
    before = "class Report:\n    LIMIT = 3\n    out = raw[raw.a > LIMIT].query('b == 2')\n"
    source = text_source("c.py", before)
    (chain,) = analyse_source(source).chains
    with pytest.raises(RewriteError, match="class body"):
        chain_edit(source, chain, (1, 0))


def test_steps_in_a_method_or_already_lambdas_still_move() -> None:
    method = "class Report:\n    def run(self, raw):\n        return raw[raw.a > 1].query('b == 2')\n"
    assert "[lambda raw: raw.a > 1]" in _rewrite(method, (1, 0))
    body = "class Report:\n    out = raw.loc[lambda d: d.a > 1].query('b == 2')\n"
    assert "raw.query('b == 2').loc[lambda d: d.a > 1]" in _rewrite(body, (1, 0))


# -- H: chains that share a start, and nested chains ---------------------------------------
def _findings(path: Path, order_of) -> tuple[list[Finding], list]:
    result = analyse_file(str(path))
    findings = [Finding("reorder", str(path), c.span, "", order=order_of(c), groups=tuple((i,) for i in order_of(c))) for c in result.chains]
    return findings, [result]


def test_two_chains_starting_at_the_same_place_get_their_own_fix(tmp_path: Path) -> None:
    path = tmp_path / "same.py"
    path.write_text("out = s[s.a > 1].query('b > 2').drop_duplicates()[lambda d: d.c > 3][lambda d: d.e > 4]\n")
    findings, results = _findings(path, lambda c: (1, 0))
    assert len(findings) == 2 and findings[0].span.line == findings[1].span.line
    fixed, files = attach_fixes(findings, results)
    assert all(f.fix is not None for f in fixed), [f.fix_error for f in fixed]
    assert files[str(path)].new_text == (
        "out = s.query('b > 2')[lambda s: s.a > 1].drop_duplicates()[lambda d: d.e > 4][lambda d: d.c > 3]\n"
    )


def test_a_nested_chain_does_not_spoil_the_other_fixes(tmp_path: Path) -> None:
    path = tmp_path / "nested.py"
    path.write_text(
        "out = df.query('a > 1', engine=t[t.a > 1].query('b == 2').e).query('c == 3')\n"
        "other = u[u.a > 1].query('b == 2')\n"
    )
    findings, results = _findings(path, lambda c: (1, 0))
    assert len(findings) == 3
    fixed, files = attach_fixes(findings, results)
    by_line = {(f.span.line, f.span.column): f for f in fixed}
    assert by_line[(2, 9)].fix is not None
    assert sum(f.fix is not None for f in fixed) == 2
    (refused,) = [f for f in fixed if f.fix is None]
    assert "run --fix again" in refused.fix_error
    assert "other = u.query('b == 2')[lambda u: u.a > 1]\n" in files[str(path)].new_text
