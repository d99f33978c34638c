"""Bind a chain to a profile. First match wins:

1. a `# chainlint: profile=NAME` comment on the chain's first line or the line above it, or
   on the statement that assigns the frame;
2. the frame was read with `pd.read_*` from a literal or module-constant path, and a profile's
   recorded source has that file name;
3. `[tool.chainlint.bindings]`: frame or parameter name globs mapped to profile names;
4. exactly one profile of the store holds every column the chain reads.
"""

from __future__ import annotations

import fnmatch
import os
from collections.abc import Sequence
from dataclasses import dataclass
from enum import Enum

from chainlint.bind.profiles import ProfileSet
from chainlint.model import Chain, OriginKind
from chainlint.profile.view import Profile


class BoundBy(Enum):
    """Which rule bound a chain to its profile (the value is how reports name it); `KERNEL`: the
    live frame of a notebook kernel, profiled on the spot."""

    COMMENT = "comment"
    SOURCE = "source"
    CONFIG = "config"
    COLUMNS = "columns"
    KERNEL = "the kernel's frame"


@dataclass(frozen=True)
class Binding:
    """`profile` and the rule that bound it (`how`), or a `reason` it is unbound; `missing` is
    the profile a comment or the configuration names when the store lacks it."""

    profile: str | None
    how: BoundBy | None = None
    reason: str | None = None
    missing: str | None = None


def _chain_columns(chain: Chain) -> set[str]:
    return {c for step in chain.steps for c in step.predicate.columns()}


def _source_names(profile: Profile) -> set[str]:
    names = set()
    for entry in profile.source.files:
        parts = entry.path.replace("\\", "/").split("/")
        names.update(p for p in parts if p)
    return names


def bind_chain(chain: Chain, profiles: ProfileSet, config: Sequence[tuple[str, str]] = ()) -> Binding:
    origin = chain.origin
    named = chain.profile_comment or (origin.profile if origin else None)
    if named:
        if named in profiles.profiles:
            return Binding(named, BoundBy.COMMENT)
        return Binding(None, reason=f"the comment names profile `{named}`, which {profiles.store} does not hold", missing=named)
    if origin and origin.kind is OriginKind.READ and origin.path:
        wanted = os.path.basename(origin.path.replace("\\", "/").rstrip("/"))
        matches = sorted(name for name, profile in profiles.profiles.items() if wanted in _source_names(profile))
        if len(matches) == 1:
            return Binding(matches[0], BoundBy.SOURCE)
    frame_name = origin.name if origin and origin.name else chain.frame
    for pattern, profile in config:
        if fnmatch.fnmatchcase(frame_name, pattern):
            if profile in profiles.profiles:
                return Binding(profile, BoundBy.CONFIG)
            return Binding(None, reason=f"[tool.chainlint.bindings] maps `{pattern}` to `{profile}`, which {profiles.store} does not hold",
                           missing=profile)
    if not profiles.profiles:
        return Binding(None, reason=f"no profiles in {profiles.store}")
    columns = _chain_columns(chain)
    holders = sorted(name for name, profile in profiles.profiles.items() if columns <= profile.by_name.keys())
    if len(holders) == 1:
        return Binding(holders[0], BoundBy.COLUMNS)
    if holders:
        listed = ", ".join(f"`{h}`" for h in holders)
        return Binding(None, reason=f"{len(holders)} profiles hold all its columns ({listed}); name one with `# chainlint: profile=NAME`")
    return Binding(None, reason="no profile holds all the columns it reads (" + ", ".join(sorted(columns)) + ")")
