"""The `pd.read_csv` options `profile` and `measure` accept, as click options."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import click

from chainlint.profile.read_options import CsvOptions


def _rows(text: str, what: str) -> tuple[int, ...]:
    try:
        rows = tuple(int(part) for part in text.split(",") if part.strip())
    except ValueError:
        raise click.BadParameter(f"{text!r}: give {what} as a number or comma-separated numbers") from None
    if not rows or any(r < 0 for r in rows):
        raise click.BadParameter(f"{text!r}: row numbers start at 0")
    return rows


def csv_options(function: Callable[..., Any]) -> Callable[..., Any]:
    """`--sep`, `--header`, `--skiprows`, `--na-value`, `--dtype`, `--parse-dates`, `--encoding`."""
    options = [
        click.option("--sep", metavar="CHAR", help="CSV: the field separator (default: ',', tab for .tsv)."),
        click.option("--header", "header", metavar="ROWS", help="CSV: the header row(s), e.g. 0 or 0,1; `none` for no header (default: 0)."),
        click.option("--skiprows", metavar="N|ROWS", help="CSV: skip the first N lines, or these line numbers (comma-separated; one alone as `1,`)."),
        click.option("--na-value", "na_values", multiple=True, metavar="TEXT", help="CSV: also read TEXT as missing (beside pandas' NA strings); repeatable."),
        click.option("--dtype", "dtypes", multiple=True, metavar="COLUMN=TYPE", help="CSV: read COLUMN as TYPE (str, int64, float64, bool, category); repeatable."),
        click.option("--parse-dates", "parse_dates", multiple=True, metavar="COLUMN", help="CSV: read COLUMN as datetimes; repeatable."),
        click.option("--encoding", metavar="NAME", help="CSV: the text encoding (default: utf-8)."),
    ]
    for option in reversed(options):
        function = option(function)
    return function


def csv_from(sep: str | None, header: str | None, skiprows: str | None, na_values: Sequence[str],
             dtypes: Sequence[str], parse_dates: Sequence[str], encoding: str | None) -> CsvOptions:
    """The reader options the command line gives (pandas' defaults for the rest)."""
    given: dict[str, Any] = {}
    if sep is not None:
        given["sep"] = sep
    if header is not None:
        given["header"] = None if header.lower() == "none" else _rows(header, "--header")
    if skiprows is not None:
        rows = _rows(skiprows, "--skiprows")
        given["skiprows"] = rows[0] if "," not in skiprows else rows
    pairs = []
    for text in dtypes:
        column, equals, dtype = text.rpartition("=")
        if not equals or not column:
            raise click.BadParameter(f"{text!r}: give --dtype as COLUMN=TYPE")
        pairs.append((column, dtype))
    return CsvOptions(na_values=tuple(na_values), dtype=tuple(pairs), parse_dates=tuple(parse_dates),
                      encoding=encoding or "utf-8", **given)
