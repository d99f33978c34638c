"""`chainlint lsp`: the same analysis as `check`, over LSP (stdio), from the editor's text.

One thin handler per feature; the work is elsewhere: `documents.py` (analyses of each
document's latest text, in worker threads, re-analysing only what an edit changed),
`fixes.py` (quick fixes as edits of the analysed text), `protocol.py` (an error response to
requests whose parameters do not read). Diagnostics follow open, change (debounced while
typing) and save, each carrying the document version it was computed for, and are never
published for a text the editor has since changed. Quick fixes are computed on the latest text
and carry its version (`documentChanges`). Positions go through pygls' codec in the encoding
negotiated with the client (UTF-16 unless it offers another). Severities are the SARIF levels
of the rules. Nothing a client sends stops the server.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence

from lsprotocol import types
from pygls.lsp.server import LanguageServer

from chainlint.engine.check import PlannedChain
from chainlint.lsp import notebooks
from chainlint.lsp.documents import Documents, DocumentState, options_for
from chainlint.lsp.fixes import Fix, fixes_for
from chainlint.lsp.protocol import ChainlintProtocol, severity
from chainlint.model import Span
from chainlint.parse.source import DEFAULT_MAX_BYTES
from chainlint.units import duration
from chainlint.version import __version__

DEBOUNCE_SECONDS = 0.025
logger = logging.getLogger("chainlint.lsp")



class ChainlintServer(LanguageServer):
    def __init__(self) -> None:
        super().__init__("chainlint", __version__, protocol_cls=ChainlintProtocol, notebook_document_sync=notebooks.SYNC)
        self.documents = Documents(DEFAULT_MAX_BYTES)
        self.published: dict[str, dict[tuple[object, ...], types.Diagnostic]] = {}


server = ChainlintServer()
notebooks.register(server, options_for)


# -- positions ------------------------------------------------------------------------------

def _range(ls: LanguageServer, lines: list[str], span: Span, ascii: bool = False) -> types.Range:
    """A span in the client's units; `ascii`: the text is ASCII, where every encoding counts
    one unit a character (the codec counts them one by one)."""
    internal = types.Range(
        start=types.Position(line=span.line - 1, character=span.column - 1),
        end=types.Position(line=span.end_line - 1, character=span.end_column - 1),
    )
    return internal if ascii else ls.workspace.position_codec.range_to_client_units(lines, internal)


def _internal(ls: LanguageServer, lines: list[str], position: types.Position) -> tuple[int, int]:
    """1-based line and character column of a client position."""
    internal = ls.workspace.position_codec.position_from_client_units(lines, position)
    return internal.line + 1, internal.character + 1


def _touches(span: Span, start: tuple[int, int], end: tuple[int, int]) -> bool:
    """Whether a cursor (start == end) is on the span, or a selection overlaps it."""
    first, after = (span.line, span.column), (span.end_line, span.end_column)
    if start == end:
        return first <= start <= after
    return first < end and start < after


# -- diagnostics ----------------------------------------------------------------------------

def diagnostics(ls: LanguageServer, state: DocumentState, made: dict[tuple[object, ...], types.Diagnostic]) -> list[types.Diagnostic]:
    """The diagnostics of an analysis; `made` holds those of the last publication, by what they
    are made of (finding and the text of its lines), and is refilled with these."""
    analysis = state.analysis
    if analysis.refusal is not None:
        start = types.Range(start=types.Position(line=0, character=0), end=types.Position(line=0, character=0))
        return [types.Diagnostic(range=start, message=analysis.refusal, severity=types.DiagnosticSeverity.Information,
                                 source="chainlint")]
    lines = analysis.source.lines
    ascii = analysis.source.text.isascii()
    listed: list[str] | None = None
    before = dict(made)
    made.clear()
    out = []
    for finding in analysis.findings:
        key = (finding.rule, finding.message, finding.span, lines[finding.span.line - 1], lines[finding.span.end_line - 1])
        diagnostic = before.get(key)
        if diagnostic is None:
            listed = list(lines) if listed is None else listed
            diagnostic = types.Diagnostic(range=_range(ls, listed, finding.span, ascii), message=finding.message,
                                          severity=severity(finding.rule), code=finding.rule, source="chainlint")
        made[key] = diagnostic
        out.append(diagnostic)
    return out


def publish(ls: ChainlintServer, state: DocumentState) -> None:
    made = ls.published.setdefault(state.uri, {})
    ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(
        uri=state.uri, version=state.version, diagnostics=diagnostics(ls, state, made)))


def _refresh(ls: ChainlintServer, uri: str, delay: float) -> None:
    ls.documents.schedule(uri, delay, lambda state: publish(ls, state), ls.workspace)


@server.feature(types.TEXT_DOCUMENT_DID_OPEN)
def did_open(ls: ChainlintServer, params: types.DidOpenTextDocumentParams) -> None:
    _refresh(ls, params.text_document.uri, 0.0)


@server.feature(types.TEXT_DOCUMENT_DID_CHANGE)
def did_change(ls: ChainlintServer, params: types.DidChangeTextDocumentParams) -> None:
    _refresh(ls, params.text_document.uri, DEBOUNCE_SECONDS)


@server.feature(types.TEXT_DOCUMENT_DID_SAVE)
def did_save(ls: ChainlintServer, params: types.DidSaveTextDocumentParams) -> None:
    _refresh(ls, params.text_document.uri, 0.0)


@server.feature(types.TEXT_DOCUMENT_DID_CLOSE)
def did_close(ls: ChainlintServer, params: types.DidCloseTextDocumentParams) -> None:
    ls.documents.close(params.text_document.uri)
    ls.published.pop(params.text_document.uri, None)
    ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(uri=params.text_document.uri, diagnostics=[]))


# -- quick fixes ----------------------------------------------------------------------------

def _fixes_in(state: DocumentState, start: tuple[int, int], end: tuple[int, int]) -> list[Fix]:
    found = []
    for finding in state.analysis.findings:
        if _touches(finding.span, start, end):
            found.extend(fixes_for(state.analysis, finding))
    return found


@server.feature(types.TEXT_DOCUMENT_CODE_ACTION, types.CodeActionOptions(code_action_kinds=[types.CodeActionKind.QuickFix]))
async def code_action(ls: ChainlintServer, params: types.CodeActionParams) -> list[types.CodeAction]:
    if params.text_document.uri in ls.notebooks.cells:
        return notebooks.code_actions(ls, params)
    state = await ls.documents.current(ls.workspace, params.text_document.uri)
    if state is None:
        return []
    lines = list(state.analysis.source.lines)
    start, end = (_internal(ls, lines, params.range.start), _internal(ls, lines, params.range.end))
    fixes: Sequence[Fix] = await ls.documents.run(_fixes_in, state, min(start, end), max(start, end))  # type: ignore[assignment]
    if not ls.documents.is_current(ls.workspace, state):
        return []  # the text changed while the fixes were made: the editor asks again
    document = types.OptionalVersionedTextDocumentIdentifier(uri=state.uri, version=state.version)
    return [
        types.CodeAction(
            title=fix.title,
            kind=types.CodeActionKind.QuickFix,
            diagnostics=[d for d in params.context.diagnostics if d.code == fix.rule] or None,
            edit=types.WorkspaceEdit(document_changes=[types.TextDocumentEdit(
                text_document=document,
                edits=[types.TextEdit(range=_range(ls, lines, edit.span), new_text=edit.text) for edit in fix.edits],
            )]),
            is_preferred=fix.preferred or None,
        )
        for fix in fixes
    ]


# -- hover ----------------------------------------------------------------------------------

@server.feature(types.TEXT_DOCUMENT_HOVER)
async def hover(ls: ChainlintServer, params: types.HoverParams) -> types.Hover | None:
    if params.text_document.uri in ls.notebooks.cells:
        item = notebooks.hovered(ls, params)
        return None if item is None else types.Hover(contents=types.MarkupContent(kind=types.MarkupKind.Markdown, value=plan_markdown(item)))
    state = await ls.documents.current(ls.workspace, params.text_document.uri)
    if state is None:
        return None
    at = _internal(ls, list(state.analysis.source.lines), params.position)
    for item in state.analysis.planned:
        if _touches(item.chain.span, at, at):
            return types.Hover(contents=types.MarkupContent(kind=types.MarkupKind.Markdown, value=plan_markdown(item)))
    return None


def plan_markdown(item: PlannedChain) -> str:
    chain = item.chain
    if item.plan is None:
        return f"**chainlint**: chain on `{chain.frame}`, {len(chain.steps)} steps, no plan: {item.binding.reason}"
    plan = item.plan
    lines = [
        f"**chainlint**: chain on `{chain.frame}`, profile `{plan.binding.profile}`, {plan.rows:,} rows: "
        f"written {duration(plan.written_seconds)}, planned {duration(plan.planned_seconds)} ({plan.speedup:.2f}x)",
        "",
        "| order | step | predicate | rows in | rows out | keeps | basis | time |",
        "| --- | --- | --- | ---: | ---: | ---: | --- | ---: |",
    ]
    for name, estimates in (("written", plan.written), ("planned", plan.planned)):
        for estimate in estimates:
            predicate = " & ".join(f"({chain.steps[i].predicate.canonical()})" if len(estimate.steps) > 1
                                   else chain.steps[i].predicate.canonical() for i in estimate.steps).replace("|", "\\|")
            numbers = " & ".join(str(i + 1) for i in estimate.steps)
            lines.append(
                f"| {name} | {numbers} | `{predicate}` | {estimate.rows_in:,.0f} | {estimate.rows_out:,.0f} | "
                f"{estimate.selectivity:.1%} | {estimate.basis.value} | {duration(estimate.seconds)} |"
            )
    return "\n".join(lines)


def main(max_bytes: int = DEFAULT_MAX_BYTES) -> None:
    # stderr is the editor's log: chainlint's own notes, and only pygls' warnings.
    logging.basicConfig(level=logging.WARNING, format="chainlint lsp: %(message)s")
    logger.setLevel(logging.INFO)
    server.documents.start(max_bytes)
    server.start_io()
