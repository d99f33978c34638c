"""The profiles of one store, loaded once per run and shared by every chain bound to them."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import Any

from chainlint.profile.format import ProfileError
from chainlint.profile.store import (
    StoreError,
    list_profiles,
    load_profile,
    redaction_key,
)


@dataclass(frozen=True)
class ProfileSet:
    store: Path
    profiles: dict[str, dict[str, Any]] = field(default_factory=dict)
    errors: tuple[str, ...] = ()
    key: bytes = b""


@lru_cache(maxsize=32)
def load_store(store: Path) -> ProfileSet:
    """Every readable profile of a store; unreadable ones become error messages naming the file."""
    profiles: dict[str, dict[str, Any]] = {}
    errors: list[str] = []
    for path in list_profiles(store):
        try:
            document = load_profile(path)
        except ProfileError as error:
            errors.append(str(error))
            continue
        profiles[path.stem] = document
    try:
        key = redaction_key(store, create=False)
    except StoreError as error:
        errors.append(str(error))
        key = b""
    return ProfileSet(store, profiles, tuple(errors), key)
