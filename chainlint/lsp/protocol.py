"""pygls' protocol, with an answer for requests whose parameters do not read.

pygls reads each message into lsprotocol's types; when the parameters of a request fail (a
negative position, one past the 32-bit range LSP allows, a string for a number), it logs the
failure and sends nothing, and the client waits for ever. JSON-RPC 2.0 asks for an error
response, code -32602 "Invalid params": this protocol sends it, naming what did not read.
Also the rules' severities in LSP terms.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from lsprotocol import types
from pygls.exceptions import JsonRpcException, JsonRpcInvalidParams
from pygls.protocol import LanguageServerProtocol

from chainlint.rules import LEVELS


@dataclass(frozen=True)
class _Unreadable:
    """A request whose parameters did not read, and why."""

    id: int | str
    method: str
    reason: str


class ChainlintProtocol(LanguageServerProtocol):
    def structure_message(self, data: dict[str, Any]) -> Any:
        try:
            return super().structure_message(data)
        except JsonRpcException as error:
            if isinstance(data, dict) and "id" in data and isinstance(data.get("method"), str):
                cause = error.__cause__ or error
                return _Unreadable(data["id"], data["method"], f"invalid parameters for {data['method']}: {cause}")
            raise

    def handle_message(self, message: Any) -> None:
        if isinstance(message, _Unreadable):
            self._send_response(message.id, None, JsonRpcInvalidParams(message.reason).to_response_error())
            return
        super().handle_message(message)


#: SARIF 2.1.0 levels as LSP 3.17 severities: the rules' one severity table, read both ways.
_SEVERITY = {
    "error": types.DiagnosticSeverity.Error,
    "warning": types.DiagnosticSeverity.Warning,
    "note": types.DiagnosticSeverity.Information,
}


def severity(rule: str) -> types.DiagnosticSeverity:
    """The editor's severity of a rule's findings: its SARIF level (documents and notebook cells alike)."""
    return _SEVERITY[LEVELS[rule]]
