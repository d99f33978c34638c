"""The profiles of one store, read as typed views, shared by every chain bound to them."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType

from chainlint.model import FileProblem
from chainlint.profile.format import ProfileError
from chainlint.profile.store import StoreError, list_profiles, load_profile, redaction_key
from chainlint.profile.view import Profile


@dataclass(frozen=True)
class ProfileSet:
    """A store's readable profiles by file name (`profiles/NAME.json`), the messages of those it
    could not read, and its redaction key (to look literals of redacted columns up)."""

    store: Path
    profiles: Mapping[str, Profile] = field(default_factory=lambda: MappingProxyType({}))
    errors: tuple[FileProblem, ...] = ()
    key: bytes = b""


def load_profiles(store: Path) -> ProfileSet:
    """Every readable profile of a store; unreadable ones become problems located in their file."""
    profiles: dict[str, Profile] = {}
    errors: list[FileProblem] = []
    try:
        paths = list_profiles(store)
    except StoreError as error:
        return ProfileSet(store, errors=(FileProblem.of(error, str(store)),))
    for path in paths:
        try:
            profiles[path.stem] = load_profile(path)
        except ProfileError as error:
            errors.append(FileProblem.of(error, str(store)))
    try:
        key = redaction_key(store, create=False)
    except StoreError as error:
        errors.append(FileProblem.of(error, str(store)))
        key = b""
    return ProfileSet(store, MappingProxyType(profiles), tuple(errors), key)
