"""`chainlint lsp`: the same analysis as `check`, over LSP (stdio), from the editor's text.

Diagnostics follow open, change (debounced while typing) and save, computed from the
in-memory text, so unsaved edits count. A `reorder` diagnostic offers a quick fix that applies
the verified rewrite as a WorkspaceEdit; hovering a chain shows its plan. Positions go through
pygls' codec in the encoding negotiated with the client (UTF-16 unless it offers another).
Profiles and configuration are read again when they change. Nothing a client sends stops the
server: failures are logged and the document simply gets no diagnostics.
"""

from __future__ import annotations

import asyncio
import logging
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import unquote, urlparse

from lsprotocol import types
from pygls.lsp.server import LanguageServer

from chainlint import __version__
from chainlint.analysis.check import (
    RULES,
    Options,
    PlannedChain,
    apply_rules,
    options_from,
    plan_results,
)
from chainlint.analysis.model import Span
from chainlint.analysis.run import analyse_source
from chainlint.config import ConfigError, load_config
from chainlint.lsp import notebooks
from chainlint.parse.source import SourceText, text_source
from chainlint.rewrite.fixes import fix_in_text
from chainlint.rewrite.permute import RewriteError
from chainlint.rules import CATALOG, Finding

DEBOUNCE_SECONDS = 0.025
logger = logging.getLogger("chainlint.lsp")


@dataclass(frozen=True)
class DocumentState:
    """What the last analysis of one document found: for code actions and hovers."""

    source: SourceText
    planned: tuple[PlannedChain, ...]
    findings: tuple[Finding, ...]


class ChainlintServer(LanguageServer):
    def __init__(self) -> None:
        super().__init__("chainlint", __version__, notebook_document_sync=notebooks.SYNC)
        self.states: dict[str, DocumentState] = {}
        self.pending: dict[str, asyncio.Task[None]] = {}


server = ChainlintServer()


def _path(uri: str) -> str:
    parsed = urlparse(uri)
    return unquote(parsed.path) if parsed.scheme == "file" else uri


def _options(path: str) -> Options:
    try:
        config = load_config(Path(path).parent if Path(path).parent.exists() else Path("."), set(RULES))
    except ConfigError as error:
        logger.warning("%s", error)
        return Options()
    return options_from(config)


notebooks.register(server, _options)


def analyse_document(uri: str, text: str) -> DocumentState:
    source = text_source(_path(uri), text)
    result = analyse_source(source)
    options = _options(source.path)
    planned, _ = plan_results([result], options)
    findings, _ = apply_rules(planned, options)
    return DocumentState(source, tuple(planned), tuple(findings))


def _range(ls: LanguageServer, source: SourceText, span: Span) -> types.Range:
    internal = types.Range(
        start=types.Position(line=span.line - 1, character=span.column - 1),
        end=types.Position(line=span.end_line - 1, character=span.end_column - 1),
    )
    return ls.workspace.position_codec.range_to_client_units(list(source.lines), internal)


def diagnostics(ls: LanguageServer, state: DocumentState) -> list[types.Diagnostic]:
    # The same level as the SARIF log: each rule's LEVEL.
    levels = {"note": types.DiagnosticSeverity.Information, "warning": types.DiagnosticSeverity.Warning,
              "error": types.DiagnosticSeverity.Error}
    severity = {module.NAME: levels[module.LEVEL] for module in CATALOG}
    out = []
    for finding in state.findings:
        out.append(types.Diagnostic(
            range=_range(ls, state.source, finding.span),
            message=finding.message,
            severity=severity.get(finding.rule, types.DiagnosticSeverity.Warning),
            code=finding.rule,
            source="chainlint",
        ))
    return out


async def refresh(ls: ChainlintServer, uri: str, delay: float) -> None:
    if delay:
        await asyncio.sleep(delay)
    try:
        document = ls.workspace.get_text_document(uri)
        state = analyse_document(uri, document.source)
    except Exception:  # noqa: BLE001 - one bad document must not stop the server
        logger.exception("analysis of %s failed", uri)
        return
    ls.states[uri] = state
    ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(uri=uri, diagnostics=diagnostics(ls, state)))


def schedule(ls: ChainlintServer, uri: str, delay: float) -> None:
    previous = ls.pending.pop(uri, None)
    if previous is not None and not previous.done():
        previous.cancel()
    ls.pending[uri] = asyncio.get_event_loop().create_task(refresh(ls, uri, delay))


@server.feature(types.TEXT_DOCUMENT_DID_OPEN)
def did_open(ls: ChainlintServer, params: types.DidOpenTextDocumentParams) -> None:
    schedule(ls, params.text_document.uri, 0.0)


@server.feature(types.TEXT_DOCUMENT_DID_CHANGE)
def did_change(ls: ChainlintServer, params: types.DidChangeTextDocumentParams) -> None:
    schedule(ls, params.text_document.uri, DEBOUNCE_SECONDS)


@server.feature(types.TEXT_DOCUMENT_DID_SAVE)
def did_save(ls: ChainlintServer, params: types.DidSaveTextDocumentParams) -> None:
    schedule(ls, params.text_document.uri, 0.0)


@server.feature(types.TEXT_DOCUMENT_DID_CLOSE)
def did_close(ls: ChainlintServer, params: types.DidCloseTextDocumentParams) -> None:
    ls.states.pop(params.text_document.uri, None)
    ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(uri=params.text_document.uri, diagnostics=[]))


def _contains(ls: LanguageServer, source: SourceText, span: Span, position: types.Position) -> bool:
    internal = ls.workspace.position_codec.position_from_client_units(list(source.lines), position)
    line, column = internal.line + 1, internal.character + 1
    after_start = (line, column) >= (span.line, span.column)
    before_end = (line, column) <= (span.end_line, span.end_column)
    return after_start and before_end


@server.feature(types.TEXT_DOCUMENT_CODE_ACTION, types.CodeActionOptions(code_action_kinds=[types.CodeActionKind.QuickFix]))
def code_action(ls: ChainlintServer, params: types.CodeActionParams) -> list[types.CodeAction]:
    if params.text_document.uri in ls.notebooks.cells:
        return notebooks.code_actions(ls, params)
    state = ls.states.get(params.text_document.uri)
    if state is None:
        return []
    actions = []
    for finding in state.findings:
        if finding.rule != "reorder" or finding.order is None:
            continue
        wanted = params.range
        span = finding.span
        if not (_contains(ls, state.source, span, wanted.start) or _contains(ls, state.source, span, wanted.end)):
            continue
        chain = next((p.chain for p in state.planned if p.chain.span == span), None)
        if chain is None:
            continue
        try:
            edit = fix_in_text(state.source, chain, finding.order)
        except RewriteError as error:
            logger.info("no quick fix at %s:%s: %s", params.text_document.uri, span.line, error)
            continue
        text_edit = types.TextEdit(range=_range(ls, state.source, edit.span), new_text=edit.text)
        actions.append(types.CodeAction(
            title="chainlint: put the filters in the planned order",
            kind=types.CodeActionKind.QuickFix,
            diagnostics=[d for d in params.context.diagnostics if d.code == "reorder"],
            edit=types.WorkspaceEdit(changes={params.text_document.uri: [text_edit]}),
            is_preferred=True,
        ))
    return actions


@server.feature(types.TEXT_DOCUMENT_HOVER)
def hover(ls: ChainlintServer, params: types.HoverParams) -> types.Hover | None:
    if params.text_document.uri in ls.notebooks.cells:
        item = notebooks.hovered(ls, params)
        return None if item is None else types.Hover(contents=types.MarkupContent(kind=types.MarkupKind.Markdown, value=plan_markdown(item)))
    state = ls.states.get(params.text_document.uri)
    if state is None:
        return None
    for item in state.planned:
        if _contains(ls, state.source, item.chain.span, params.position):
            return types.Hover(contents=types.MarkupContent(kind=types.MarkupKind.Markdown, value=plan_markdown(item)))
    return None


def plan_markdown(item: PlannedChain) -> str:
    chain = item.chain
    if item.plan is None:
        return f"**chainlint**: chain on `{chain.frame}`, {len(chain.steps)} steps, no plan: {item.binding.reason}"
    plan = item.plan
    lines = [
        f"**chainlint**: chain on `{chain.frame}`, profile `{plan.binding.profile}`, {plan.rows:,} rows: "
        f"written {plan.written_seconds * 1e3:.1f} ms, planned {plan.planned_seconds * 1e3:.1f} ms ({plan.speedup:.2f}x)",
        "",
        "| order | step | predicate | rows in | rows out | keeps | basis | time |",
        "| --- | --- | --- | ---: | ---: | ---: | --- | ---: |",
    ]
    for name, estimates in (("written", plan.written), ("planned", plan.planned)):
        for estimate in estimates:
            step = chain.steps[estimate.step]
            predicate = step.predicate.canonical().replace("|", "\\|")
            lines.append(
                f"| {name} | {estimate.step + 1} | `{predicate}` | {estimate.rows_in:,.0f} | {estimate.rows_out:,.0f} | "
                f"{estimate.selectivity:.1%} | {estimate.basis} | {estimate.seconds * 1e3:.1f} ms |"
            )
    return "\n".join(lines)


def main() -> None:
    # stderr is the editor's log: chainlint's own notes, and only pygls' warnings.
    logging.basicConfig(level=logging.WARNING, format="chainlint lsp: %(message)s")
    logger.setLevel(logging.INFO)
    server.start_io()
