"""The store's calibrated cost model (`.chainlint/cost-model.json`, written by `chainlint
calibrate`), read and checked with the store documents' checks; the built-in model where the
store has none or it cannot be used."""

from __future__ import annotations

from dataclasses import asdict
from pathlib import Path
from typing import Any

from chainlint.estimate.calibrate import COST_MODEL_FILE, model_from_json
from chainlint.estimate.cost import DEFAULT_MODEL, CostModel
from chainlint.model import ChainlintError, FileProblem
from chainlint.profile.documents import (
    SMALL_BYTES,
    Check,
    FieldProblem,
    constant,
    listing,
    number,
    pair,
    read_json,
    record,
    validated,
)


def check_cost_model(document: Any, path: Path | str) -> dict[str, Any]:
    """Every field the document holds has the shape of the built-in model's (unknown fields are
    refused when the model is built)."""
    fields: dict[str, Check] = {}
    for name, default in asdict(DEFAULT_MODEL).items():
        if isinstance(default, dict):
            fields[name] = record({kind: number(0, 1e12) for kind in default})
        elif isinstance(default, (list, tuple)):
            fields[name] = _share_costs
        else:
            fields[name] = number(0, 1e12)
    model = record({}, fields)
    return validated(document, path, record({"format": constant("chainlint-cost-model"), "model": model},
                                            {"format_version": constant(1)}))


def _share_costs(value: Any, field: str) -> None:
    listing(pair(number(0, 1), number(0, 1e12)))(value, field)
    if not value:
        raise FieldProblem(field, "must hold at least one [share, cost] pair")


def load_cost_model(store: Path) -> tuple[CostModel, FileProblem | None]:
    """The store's model, or the built-in one with the problem, located in the file."""
    path = store / COST_MODEL_FILE
    if not path.exists():
        return DEFAULT_MODEL, None
    try:
        return model_from_json(check_cost_model(read_json(path, SMALL_BYTES), path)), None
    except (OSError, ValueError) as error:  # DocumentError is a ValueError
        reason = error.reason if isinstance(error, ChainlintError) else str(error)
        line, column = (error.line, error.column) if isinstance(error, ChainlintError) else (None, None)
        problem = ChainlintError(f"cannot use the calibrated cost model: {reason}", path=str(path), line=line, column=column)
        return DEFAULT_MODEL, FileProblem.of(problem, str(path))
