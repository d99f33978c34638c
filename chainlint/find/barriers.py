"""What makes a filter depend on the frame it receives, and how to say so to the user.

A step that reads a reduction, a window, a rank, positions or the index of its input keeps
different rows when other filters run before it, so it must stay where it is written.
"""

from __future__ import annotations

#: Series/DataFrame methods whose result for one row depends on the other rows received.
_REDUCTIONS = {
    "mean": "the mean",
    "median": "the median",
    "std": "the standard deviation",
    "var": "the variance",
    "sem": "the standard error",
    "skew": "the skewness",
    "kurt": "the kurtosis",
    "quantile": "a quantile",
    "max": "the maximum",
    "min": "the minimum",
    "sum": "the sum",
    "prod": "the product",
    "count": "the count",
    "nunique": "the number of distinct values",
    "mode": "the mode",
    "idxmax": "the label of the maximum",
    "idxmin": "the label of the minimum",
    "all": "whether all values hold",
    "any": "whether any value holds",
    "describe": "a summary",
    "agg": "an aggregate",
    "aggregate": "an aggregate",
}
_PHRASES = {
    "rank": "ranks {of} among the rows it receives",
    "shift": "compares {of} with neighbouring rows (`shift`)",
    "diff": "compares {of} with neighbouring rows (`diff`)",
    "pct_change": "compares {of} with neighbouring rows (`pct_change`)",
    "cumsum": "accumulates {of} over the rows it receives (`cumsum`)",
    "cumprod": "accumulates {of} over the rows it receives (`cumprod`)",
    "cummax": "accumulates {of} over the rows it receives (`cummax`)",
    "cummin": "accumulates {of} over the rows it receives (`cummin`)",
    "cumcount": "numbers the rows it receives (`cumcount`)",
    "rolling": "reads a rolling window over {of}",
    "expanding": "reads an expanding window over {of}",
    "ewm": "reads an exponentially weighted window over {of}",
    "duplicated": "looks for duplicates among the rows it receives",
    "drop_duplicates": "looks for duplicates among the rows it receives",
    "groupby": "groups the rows it receives (`groupby`)",
    "transform": "aggregates over the rows it receives (`transform`)",
    "nlargest": "keeps the largest values among the rows it receives",
    "nsmallest": "keeps the smallest values among the rows it receives",
    "sample": "draws a random sample of the rows it receives",
    "value_counts": "counts values over the rows it receives",
    "head": "reads row positions (`head`)",
    "tail": "reads row positions (`tail`)",
    "reset_index": "reads row positions (`reset_index`)",
}

#: Frame attributes that are not columns, and what reading them means.
FRAME_ATTRIBUTES = {
    "index": "reads the index",
    "iloc": "reads row positions",
    "iat": "reads row positions",
    "shape": "reads the number of rows it receives",
    "size": "reads the number of rows it receives",
    "empty": "reads whether it receives any rows",
    "axes": "reads the index",
}

#: Attributes that are frame API, not columns, but do not by themselves depend on other rows.
NOT_COLUMNS = frozenset(
    {"columns", "dtypes", "values", "T", "loc", "at", "ndim", "attrs", "flags", "style", "plot", "str", "dt", "cat"}
)


def is_frame_method(name: str) -> bool:
    return name in _REDUCTIONS or name in _PHRASES


def frame_reason(method: str, of: str) -> str:
    """The user-facing reason for a frame-dependent call of `method` on `of` (e.g. "`weight`")."""
    if method in _REDUCTIONS:
        return f"reads {_REDUCTIONS[method]} of {of} over the rows it receives"
    return _PHRASES[method].format(of=of)
