"""The dtypes of a chain's first frame: the bound profile's, as the code's own read call changes
them. A profile records the dtypes `pd.read_*` gives with the options it was made with; the
code may read the same file with others (`dtype={'s': object}`), and how far a step may move
depends on the dtypes the code gets (`chainlint.plan.totality`)."""

from __future__ import annotations

from collections.abc import Mapping

from chainlint.model import FrameOrigin, OriginKind

#: `dtype=` spellings by the name pandas 3 prints for the dtype they give.
_SPELLINGS = {"O": "object", "object": "object", "int": "int64", "float": "float64", "str": "str"}


def frame_dtypes(origin: FrameOrigin | None, profiled: Mapping[str, str]) -> dict[str, str]:
    """The profile's dtypes with the read call's literal `dtype=` applied; none at all where the
    call passes options that may change dtypes which chainlint does not follow (every column
    then judged unknown: no step moves)."""
    if origin is None or origin.kind is not OriginKind.READ:
        return dict(profiled)
    if origin.unfollowed:
        return {}
    dtypes = dict(profiled)
    given = dict(origin.read_options).get("dtype")
    if isinstance(given, str):
        return {column: _SPELLINGS.get(given, given) for column in dtypes}
    for pair in given if isinstance(given, tuple) else ():
        if isinstance(pair, tuple) and len(pair) == 2 and isinstance(pair[1], str) and pair[0] in dtypes:
            dtypes[pair[0]] = _SPELLINGS.get(pair[1], pair[1])
    return dtypes


def unknown_because(origin: FrameOrigin | None) -> str | None:
    """Why every column's dtype is unknown (`frame_dtypes` gave none), for `explain`."""
    if origin is None or origin.kind is not OriginKind.READ or not origin.unfollowed:
        return None
    options = ", ".join(f"`{name}=`" if name != "**" else "`**`" for name in origin.unfollowed)
    return f"the code reads its frame with {options}, which may change the dtypes profiled and which chainlint does not follow"
