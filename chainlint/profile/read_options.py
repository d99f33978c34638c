"""The `pd.read_csv` options chainlint follows: from the command line, or from the literal
keyword arguments of the code's own `pd.read_csv(...)` call, and back to command-line flags.

Plain Python (no pyarrow), so that `check` can print the command that profiles a file."""

from __future__ import annotations

import codecs
import shlex
from dataclasses import dataclass
from typing import Any

from chainlint.profile.errors import DataError

#: The dtypes `dtype` may name (the reader maps them to Arrow types).
DTYPE_NAMES = frozenset({"str", "string", "object", "int64", "int", "Int64", "int32", "float64", "float", "float32",
                         "bool", "boolean", "category"})


@dataclass(frozen=True)
class CsvOptions:
    """The `pd.read_csv` options chainlint follows; the defaults are pandas' own.

    `header`: the header rows (`None`: no header; several: names joined as pandas' tuples
    print); `skiprows`: a count of leading lines, or line numbers (leading ones, or the ones
    right after the header); `na_values` add to pandas' NA strings; `dtype`: (column, dtype)
    pairs; `parse_dates`: columns read as datetimes.
    """

    sep: str | None = None
    header: tuple[int, ...] | None = (0,)
    skiprows: int | tuple[int, ...] = 0
    na_values: tuple[str, ...] = ()
    dtype: tuple[tuple[str, str], ...] = ()
    parse_dates: tuple[str, ...] = ()
    encoding: str = "utf-8"

    def check(self) -> None:
        """Raise DataError for options chainlint cannot follow."""
        if self.sep is not None and len(self.sep) != 1:
            raise DataError(f"separator {self.sep!r}: only a single character is supported")
        unknown = sorted({d for _, d in self.dtype if d not in DTYPE_NAMES})
        if unknown:
            raise DataError(f"dtype {unknown[0]!r} is not supported (use one of {', '.join(sorted(DTYPE_NAMES))})")
        if self.header is not None and (not self.header or list(self.header) != list(range(self.header[0], self.header[-1] + 1))):
            raise DataError("header rows must be consecutive")
        try:
            name = codecs.lookup(self.encoding).name
        except LookupError:
            raise DataError(f"unknown encoding {self.encoding!r}") from None
        if name.startswith(("utf-16", "utf-32")):
            raise DataError(f"encoding {self.encoding!r} is not supported (line ends are not single bytes)")


def options_from_code(pairs: tuple[tuple[str, object], ...]) -> CsvOptions:
    """The options a `pd.read_csv(...)` call passes as literals; DataError for one chainlint
    cannot follow (a per-column `na_values`, one dtype for every column, ...)."""
    given = dict(pairs)
    values: dict[str, Any] = {}
    sep = given.get("sep", given.get("delimiter"))
    if sep is not None:
        values["sep"] = _text(sep, "sep")
    if "header" in given:
        header = given["header"]
        if header is None:
            values["header"] = None
        elif header == "infer":
            values["header"] = (0,)
        elif isinstance(header, int) and not isinstance(header, bool):
            values["header"] = (header,)
        elif isinstance(header, tuple) and all(isinstance(h, int) for h in header):
            values["header"] = header
        else:
            raise DataError(f"header={header!r} is not supported")
    if "skiprows" in given:
        skiprows = given["skiprows"]
        if not (isinstance(skiprows, int) or (isinstance(skiprows, tuple) and all(isinstance(r, int) for r in skiprows))):
            raise DataError(f"skiprows={skiprows!r} is not supported")
        values["skiprows"] = skiprows
    if "na_values" in given:
        na = given["na_values"]
        values["na_values"] = (na,) if isinstance(na, str) else tuple(_text(v, "na_values") for v in _items(na, "na_values"))
    if "dtype" in given:
        values["dtype"] = tuple((_text(k, "dtype"), _text(v, "dtype")) for k, v in _pairs(given["dtype"], "dtype"))
    if "parse_dates" in given:
        values["parse_dates"] = tuple(_text(v, "parse_dates") for v in _items(given["parse_dates"], "parse_dates"))
    if "encoding" in given:
        values["encoding"] = _text(given["encoding"], "encoding")
    options = CsvOptions(**values)
    options.check()
    return options


def _text(value: object, what: str) -> str:
    if not isinstance(value, str):
        raise DataError(f"{what}={value!r} is not supported")
    return value


def _items(value: object, what: str) -> tuple:  # type: ignore[type-arg]
    if not isinstance(value, tuple) or any(isinstance(v, tuple) for v in value):
        raise DataError(f"{what}={value!r} is not supported (a list of names or strings is)")
    return value


def _pairs(value: object, what: str) -> tuple:  # type: ignore[type-arg]
    if not isinstance(value, tuple) or not all(isinstance(v, tuple) and len(v) == 2 for v in value):
        raise DataError(f"{what}={value!r} is not supported (a dictionary of column names is)")
    return value


def command_flags(options: CsvOptions) -> str:
    """The `chainlint profile` flags that read a file with `options` (empty for the defaults)."""
    flags: list[str] = []
    if options.sep is not None:
        flags += ["--sep", options.sep]
    if options.header != (0,):
        flags += ["--header", "none" if options.header is None else ",".join(map(str, options.header))]
    if options.skiprows:
        skip = options.skiprows
        flags += ["--skiprows", str(skip) if isinstance(skip, int) else "".join(f"{r}," for r in skip)]
    for value in options.na_values:
        flags += ["--na-value", value]
    for column, dtype in options.dtype:
        flags += ["--dtype", f"{column}={dtype}"]
    for column in options.parse_dates:
        flags += ["--parse-dates", column]
    if options.encoding != "utf-8":
        flags += ["--encoding", options.encoding]
    return " ".join(shlex.quote(f) for f in flags)
