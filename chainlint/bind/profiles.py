"""The profiles of one store, loaded once per run and shared by every chain bound to them."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import Any

from chainlint.estimate.calibrate import COST_MODEL_FILE, model_from_json
from chainlint.estimate.cost import DEFAULT_MODEL, CostModel
from chainlint.profile.documents import SMALL_BYTES, check_cost_model, read_json
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
    model: CostModel = DEFAULT_MODEL


def load_store(store: Path) -> ProfileSet:
    """Every readable profile of a store; unreadable ones become error messages naming the file.

    Loaded once per state of the store's files (names, sizes, modification times), so a
    long-running process sees a re-profiled or recalibrated store without restarting.
    """
    try:
        files = [*list_profiles(store), store / "config.json", store / COST_MODEL_FILE]
    except StoreError as error:
        return ProfileSet(store, errors=(str(error),))
    signature = []
    for path in files:
        try:
            stat = path.stat()
        except OSError:
            continue
        signature.append((path.name, stat.st_size, stat.st_mtime_ns))
    return _load(store, tuple(signature))


@lru_cache(maxsize=32)
def _load(store: Path, signature: tuple[tuple[str, int, int], ...]) -> ProfileSet:
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
    model = DEFAULT_MODEL
    model_path = store / COST_MODEL_FILE
    if model_path.exists():
        try:
            model = model_from_json(check_cost_model(read_json(model_path, SMALL_BYTES), model_path))
        except (OSError, ValueError) as error:  # DocumentError is a ValueError
            errors.append(f"{model_path}: cannot use the calibrated cost model: {str(error).removeprefix(f'{model_path}: ')}")
    return ProfileSet(store, profiles, tuple(errors), key, model)
