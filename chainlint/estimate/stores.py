"""The profile stores a run plans against, read once per state of their files.

The caller owns a `LoadedStores` for as long as its results may be reused (a command for one
run, the editor for a document) and passes it in: nothing is cached behind its back. A store
is read again when any of its profile files, `config.json` or `cost-model.json` changes name,
size or modification time, so a long-running process sees a re-profiled or recalibrated store
without restarting.
"""

from __future__ import annotations

from pathlib import Path

from chainlint.bind.profiles import ProfileSet, load_profiles
from chainlint.estimate.calibrate import COST_MODEL_FILE
from chainlint.estimate.cost import DEFAULT_MODEL, CostModel
from chainlint.estimate.model_file import load_cost_model
from chainlint.estimate.selectivity import Estimator
from chainlint.model import FileProblem
from chainlint.profile.store import StoreError, list_profiles

State = tuple[tuple[str, int, int], ...]


class LoadedStore:
    """One state of a store: its profiles, its cost model, every problem reading them, and one
    estimator per profile, made when a chain is first bound to it."""

    def __init__(self, profiles: ProfileSet, model: CostModel = DEFAULT_MODEL, model_error: FileProblem | None = None,
                 state: State | None = None) -> None:
        self.profiles = profiles
        self.model = model
        self.errors = profiles.errors + ((model_error,) if model_error else ())
        self.state = state
        self._estimators: dict[str, Estimator] = {}

    def estimator(self, name: str) -> Estimator:
        """The estimator of profile `name` (one of `profiles.profiles`)."""
        estimator = self._estimators.get(name)
        if estimator is None:
            estimator = self._estimators[name] = Estimator(self.profiles.profiles[name], self.profiles.key)
        return estimator


class LoadedStores:
    """Every store a run has read, by folder."""

    def __init__(self) -> None:
        self._stores: dict[Path, LoadedStore] = {}

    def load(self, store: Path) -> LoadedStore:
        """The store as its files are now: the one read before when none of them changed."""
        try:
            files = [*list_profiles(store), store / "config.json", store / COST_MODEL_FILE]
        except StoreError as error:
            return LoadedStore(ProfileSet(store, errors=(FileProblem.of(error, str(store)),)))
        state = _state(files)
        loaded = self._stores.get(store)
        if loaded is None or loaded.state != state:
            loaded = self._stores[store] = LoadedStore(load_profiles(store), *load_cost_model(store), state=state)
        return loaded


def _state(files: list[Path]) -> State:
    signature = []
    for path in files:
        try:
            info = path.stat()
        except OSError:
            continue
        signature.append((path.name, info.st_size, info.st_mtime_ns))
    return tuple(signature)
