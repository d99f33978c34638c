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

#: Every public attribute of a DataFrame: `d.count` is the method even where the frame has a
#: column `count` (attribute access reaches a column only when no attribute has its name).
#: pandas 3.1.1's `dir(pd.DataFrame)` (tests/test_hostile_rewrite.py checks the installed
#: pandas against it), and the names pandas 2 still had.
DATAFRAME_ATTRIBUTES = frozenset("""
    T abs add add_prefix add_suffix agg aggregate align all any apply asfreq asof assign astype at
    at_time attrs axes between_time bfill boxplot clip columns combine combine_first compare
    convert_dtypes copy corr corrwith count cov cummax cummin cumprod cumsum describe diff div
    divide dot drop drop_duplicates droplevel dropna dtypes duplicated empty eq equals eval ewm
    expanding explode ffill fillna filter first_valid_index flags floordiv from_arrow from_dict
    from_records ge get groupby gt head hist iat idxmax idxmin iloc index infer_objects info insert
    interpolate isetitem isin isna isnull items iterrows itertuples join keys kurt kurtosis
    last_valid_index le loc lt map mask max mean median melt memory_usage merge min mod mode mul
    multiply ndim ne nlargest notna notnull nsmallest nunique pct_change pipe pivot pivot_table plot
    pop pow prod product quantile query radd rank rdiv reindex reindex_like rename rename_axis
    reorder_levels replace resample reset_index rfloordiv rmod rmul rolling round rpow rsub rtruediv
    sample select select_dtypes sem set_axis set_flags set_index shape shift size skew sort_index
    sort_values sparse squeeze stack std style sub subtract sum swaplevel tail take to_clipboard
    to_csv to_dict to_excel to_feather to_hdf to_html to_iceberg to_json to_latex to_markdown
    to_numpy to_orc to_parquet to_period to_pickle to_records to_sql to_stata to_string to_timestamp
    to_xarray to_xml transform transpose truediv truncate tz_convert tz_localize unstack update
    value_counts values var where xs
    append applymap backfill bool first iteritems ix last lookup mad pad slice_shift swapaxes tshift
""".split())


def is_frame_method(name: str) -> bool:
    return name in _REDUCTIONS or name in _PHRASES


def frame_reason(method: str, of: str) -> str:
    """The user-facing reason for a frame-dependent call of `method` on `of` (e.g. "`weight`")."""
    if method in _REDUCTIONS:
        return f"reads {_REDUCTIONS[method]} of {of} over the rows it receives"
    return _PHRASES[method].format(of=of)


def receiver_read_elsewhere(name: str, at_run_time: bool) -> str:
    """The reason a step of a statement run stays: `name`, the frame it receives, is read
    besides the run (by name at run time, when its scope calls `eval`, `locals`, ...)."""
    how = "may be read by name at run time (`eval`, `locals()`, ...)" if at_run_time else "is read elsewhere"
    return f"`{name}`, the frame this step receives, {how}: no step moves across its statement"


def assigned_between(name: str) -> str:
    """The reason a step of a statement run stays: a statement between its filter and the one
    before assigns `name`, which a filter of the run reads."""
    return f"`{name}` is assigned between this filter and the one before: no step moves across that statement"
