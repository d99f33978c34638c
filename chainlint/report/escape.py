"""Make names from the file system and the analysed code safe to print.

A file name may hold a line break (and so forge a `path:line:col: error:` line), other control
characters, or bytes that are not UTF-8 (Python holds them as lone surrogates, which no UTF-8
output can encode). Every report passes paths and messages through here: text reports escape
control characters and such bytes; JSON and SARIF keep JSON's own escapes for control
characters (lossless) and escape the lone surrogates.
"""

from __future__ import annotations

import re
from typing import Any

_NAMED = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}
# C0 and C1 controls, DEL, the Unicode line and paragraph separators, and lone surrogates.
_UNPRINTABLE = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\ud800-\udfff]")
_SURROGATE = re.compile("[\ud800-\udfff]")


def _escape(match: re.Match[str]) -> str:
    char = match.group()
    code = ord(char)
    if char in _NAMED:
        return _NAMED[char]
    if 0xDC80 <= code <= 0xDCFF:  # an undecodable byte of a file name (surrogateescape)
        return f"\\x{code - 0xDC00:02x}"
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def printable(text: str) -> str:
    """`text` on one line: control characters and undecodable bytes as backslash escapes."""
    return _UNPRINTABLE.sub(_escape, text)


def encodable(document: Any) -> Any:
    """`document` with every string's lone surrogates escaped, so that it encodes as UTF-8."""
    if isinstance(document, str):
        return _SURROGATE.sub(_escape, document)
    if isinstance(document, dict):
        return {encodable(k): encodable(v) for k, v in document.items()}
    if isinstance(document, (list, tuple)):
        return [encodable(v) for v in document]
    return document
