"""A textual screen in front of the parser: most files hold no chain and need no `ast.parse`.

A chain has two adjacent steps, so its text shows one of two seams:
- in a method chain, the `]` or `)` that ends a step, then only blanks, comments, backslash
  continuations or closing parentheses, then `[` or `.loc` / `.query` / `.dropna`;
- in a statement run, the `]` or `)` that ends a statement, then a statement `x = x[...]` /
  `x = x.loc` / `.query` / `.dropna` (only blanks, comments, `;` and `)` between);
- a run under new names or with other statements between shows no seam: in a file with two or
  more statements `y = x[...]` / `y = x.loc` / `.query` / `.dropna` or `x.dropna(` at the start
  of a line, each of them is a seam;
- a fused mask (one step whose mask is a conjunction, a chain of its conjuncts) shows an `&`
  (not `&=`), or is a `.query(` call whose text says `and`: each `&` and `.query(` is a seam.
The screen looks for these seams with possessive regular expressions (linear time). It is
conservative by construction: it may pass a file without a chain, never the reverse, which a
property test checks against the finder. A subscript whose whole content is a literal, a plain
name, a slice or a list (`x[0]`, `x["a"]`, `x[i:j]`, `x[["a"]]`) is not a seam, with two
exceptions that may be a chain's later step: a dotted name (`df[a][df.flag]`, a boolean column of
the chain's frame) and a plain name the file assigns somewhere (`m = df.b > 2` ... `df[a][m]`, a
mask bound before the chain); `x[i][j]` with `j` never assigned stays no seam.

The seams also tell the finder where to look: only statements whose lines meet a seam are
walked. Non-ASCII text is first NFKC-normalised, as Python normalises identifiers, and every
non-ASCII character becomes `x`: seams are ASCII, and merging names can only add matches.
"""

from __future__ import annotations

import bisect
import re
import unicodedata

_GAP = r"(?:[\s)\\]++|#[^\r\n]*+)*+"
_GAP_STATEMENT = r"(?:[\s);\\]++|#[^\r\n]*+)*+"
_GAP_OPEN = r"(?:[\s(\\]++|#[^\r\n]*+)*+"
_BLANK = r"(?:[\s\\]++|#[^\r\n]*+)*+"
_METHOD = r"\." + _BLANK + r"(?:loc|query|dropna)(?!\w)"
_LITERAL = r"""(?:-?\d[\w.]*|'[^'\r\n\\]*'|"[^"\r\n\\]*")"""
_NAME = r"\w+(?:\.\w+)*"
#: In a method chain, a plain name after a step may be a mask bound to it (`_MASK_NAME` tells),
#: and a dotted name a boolean column of the chain's frame: only literals and plain names are
#: never a step here.
_NEVER_A_STEP = r"\s*+(?:(?:" + _LITERAL + r"|\w+)\s*+[\],:]|[:\[])"
#: In a statement, a name (`t = df[m]`, `t = df[df.flag]`) may be a mask bound earlier or a
#: boolean column; in a method chain such a step needs another step after the first to be found.
_NEVER_A_STEP_STATEMENT = r"\s*+(?:" + _LITERAL + r"\s*+[\],:]|" + _NAME + r"\s*+[,:]|[:\[])"

_METHOD_SEAM = re.compile(r"[\])]" + _GAP + r"(?:\[(?!" + _NEVER_A_STEP + r")|" + _METHOD + r")")
_RUN_SEAM = re.compile(
    r"[\])]" + _GAP_STATEMENT + r"([A-Za-z_]\w*+)" + _BLANK + r"=(?!=)" + _GAP_OPEN + r"\1(?!\w)"
    + _GAP + r"(?:\[|" + _METHOD + r")"
)
#: A statement that filters a named frame into a name (`late = north[...]`, `t = t.dropna(...)`)
#: or drops rows in place: two of them in a file may be a run under new names or with other
#: statements between.
_FILTER_STATEMENT = re.compile(
    r"(?m)^[ \t]*+(?:[A-Za-z_]\w*+[ \t]*+=(?!=)[ \t]*+[A-Za-z_]\w*+" + _GAP
    + r"(?:\[(?!" + _NEVER_A_STEP_STATEMENT + r")|" + _METHOD + r")|[A-Za-z_]\w*+\.dropna\()"
)
_FUSED = re.compile(r"&(?!=)|\." + _BLANK + r"query" + _BLANK + r"\(")
#: A plain name as the whole key of a later step (`df[a][m]`): a seam when the file assigns it.
_MASK_NAME = re.compile(r"[\])]" + _GAP + r"\[\s*+([A-Za-z_]\w*+)\s*+\]")
#: A name assigned (or passed as a keyword: more names only add seams).
_ASSIGNED = re.compile(r"(?<![\w.])([A-Za-z_]\w*+)" + _BLANK + r"=(?!=)")
_NON_ASCII = re.compile(r"[^\x00-\x7f]")
_NEWLINE = re.compile(r"\r\n|\r|\n")


class Seams:
    """Line spans (1-based, inclusive) where the screen saw a seam; `None` spans: look everywhere."""

    __slots__ = ("_starts", "_ends")

    def __init__(self, spans: list[tuple[int, int]] | None) -> None:
        if spans is None:
            self._starts: list[int] | None = None
            self._ends: list[int] = []
            return
        merged: list[list[int]] = []
        for start, end in sorted(spans):
            if merged and start <= merged[-1][1] + 1:
                merged[-1][1] = max(merged[-1][1], end)
            else:
                merged.append([start, end])
        self._starts = [s for s, _ in merged]
        self._ends = [e for _, e in merged]

    @property
    def empty(self) -> bool:
        return self._starts is not None and not self._starts

    def within(self, ranges: list[tuple[int, int]]) -> Seams:
        """These seams cut to the given line ranges (1-based, inclusive): to walk only those lines."""
        if self._starts is None:
            return Seams(list(ranges))
        spans = []
        for first, last in ranges:
            index = bisect.bisect_left(self._ends, first)
            while index < len(self._starts) and self._starts[index] <= last:
                spans.append((max(self._starts[index], first), min(self._ends[index], last)))
                index += 1
        return Seams(spans)

    def relative(self, first: int, last: int) -> tuple[tuple[int, int], ...] | None:
        """The seams within lines first..last, counted from `first` (None: look everywhere): the
        same for two places of one text when the screen sees them alike."""
        if self._starts is None:
            return None
        spans = []
        index = bisect.bisect_left(self._ends, first)
        while index < len(self._starts) and self._starts[index] <= last:
            spans.append((max(self._starts[index], first) - first, min(self._ends[index], last) - first))
            index += 1
        return tuple(spans)

    def meets(self, first_line: int, last_line: int) -> bool:
        """Whether any seam lies within lines first_line..last_line."""
        if self._starts is None:
            return True
        i = bisect.bisect_right(self._starts, last_line) - 1
        return i >= 0 and self._ends[i] >= first_line


def find_seams(text: str) -> Seams:
    """Screen a source text; `Seams.empty` means the file cannot hold a chain."""
    if not text.isascii():
        text = _NON_ASCII.sub("x", unicodedata.normalize("NFKC", text))
    matches = [m.span() for m in _METHOD_SEAM.finditer(text)]
    matches += [m.span() for m in _RUN_SEAM.finditer(text)]
    matches += [m.span() for m in _FILTER_STATEMENT.finditer(text)]
    matches += [m.span() for m in _FUSED.finditer(text)]
    named = [(m.group(1), m.span()) for m in _MASK_NAME.finditer(text)]
    if named:
        assigned = {m.group(1) for m in _ASSIGNED.finditer(text)}
        matches += [span for name, span in named if name in assigned]
    if not matches:
        return Seams([])
    line_starts = [0] + [m.end() for m in _NEWLINE.finditer(text)]
    spans = []
    for start, end in matches:
        first = bisect.bisect_right(line_starts, start)
        last = bisect.bisect_right(line_starts, max(start, end - 1))
        spans.append((first, last))
    return Seams(spans)
