"""A chain of row filters as the finder found it: its steps, their barriers, its first frame."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from enum import Enum
from typing import TYPE_CHECKING

from chainlint.model.spans import Cell, Span

if TYPE_CHECKING:  # a step holds an IR node; the IR sits above the model (see DEVELOPERS.md)
    from chainlint.ir import Node


class StepKind(Enum):
    """The six written forms of a row filter; the value is how reports name the form."""

    LOC_LAMBDA = "loc_lambda"
    LOC_MASK = "loc_mask"
    GETITEM_LAMBDA = "getitem_lambda"
    GETITEM_MASK = "getitem_mask"
    QUERY = "query"
    DROPNA = "dropna"

    @classmethod
    def subscript(cls, loc: bool, mask: bool) -> StepKind:
        """The form of `df.loc[key]` (`loc`) or `df[key]`, for a mask or a lambda key."""
        if loc:
            return cls.LOC_MASK if mask else cls.LOC_LAMBDA
        return cls.GETITEM_MASK if mask else cls.GETITEM_LAMBDA

    @property
    def is_mask(self) -> bool:
        return self in (StepKind.LOC_MASK, StepKind.GETITEM_MASK)

    @property
    def is_lambda(self) -> bool:
        return self in (StepKind.LOC_LAMBDA, StepKind.GETITEM_LAMBDA)

    @property
    def is_getitem(self) -> bool:
        return self in (StepKind.GETITEM_MASK, StepKind.GETITEM_LAMBDA)


class BarrierKind(Enum):
    """Why a step may not move: it reads the frame it receives, it is not understood, or it is a
    mask computed on another frame."""

    FRAME = "frame"
    OPAQUE = "opaque"
    FOREIGN = "foreign"


class MaskFrame(Enum):
    """Which frame a mask's columns come from: the one the step filters, the chain's first
    frame, or another frame."""

    OWN = "own"
    OUTER = "outer"
    FOREIGN = "foreign"


class ChainForm(Enum):
    """One expression (`df[a].query(b)`), a run of assignments (`x = df[a]` / `x = x[b]`), or
    the conjuncts of one mask written in the code (`df[(df.a > 1) & (df.b == 2)]`)."""

    METHOD = "method"
    STATEMENTS = "statements"
    MASK = "mask"


class OriginKind(Enum):
    """What the code says a chain's first frame is."""

    READ = "read"
    PARAMETER = "parameter"
    ASSIGNED = "assigned"
    UNKNOWN = "unknown"


@dataclass(frozen=True)
class Barrier:
    """Why a step may not move, and the reason users read."""

    kind: BarrierKind
    reason: str


@dataclass(frozen=True)
class Step:
    """One row filter of a chain.

    `span` covers the step's own text (`.loc[...]`, `[...]`, `.query(...)`, `.dropna(...)`),
    `statement` is the index of its statement within a statement run (0 in a method chain),
    `mask_frame` says, for masks, whether the mask is built from the frame the step filters
    (`own`), from the chain's first frame (`outer`), or from another frame (`foreign`);
    `mask_name` is the name the mask reads columns from and `mask_span` the mask's text;
    `own` is the name of the frame the step filters when it filters a named frame directly;
    `conjunct`, for a step of a chain of form `mask` (one written mask, `df[(a) & (b)]`), is the
    span of this conjunct's text inside the mask (without parentheses around it; inside the
    string of a `.query`), while `span` is the whole written step all its conjuncts share.
    In a statement run, `alone` says the step is the only filter of a statement
    `name = frame<step>` standing alone on its lines (nothing else on them but a comment, no
    walrus), and `merges` that this statement and the one before it are both so and that the
    name the one before assigns is this one's or is used nowhere else in its scope: the two may
    become one statement, that name no longer bound. `apart` says why a step joins no mask with
    others though it may move: the rewriter could not write them as one (`find/joining.py`).
    """

    kind: StepKind
    span: Span
    predicate: Node
    barrier: Barrier | None = None
    mask_frame: MaskFrame | None = None
    statement: int = 0
    own: str | None = None
    mask_name: str | None = None
    mask_span: Span | None = None
    conjunct: Span | None = None
    alone: bool = False
    merges: bool = False
    apart: str | None = None

    @property
    def movable(self) -> bool:
        return self.barrier is None

    @property
    def columns(self) -> tuple[str, ...]:
        return tuple(sorted(self.predicate.columns()))


@dataclass(frozen=True)
class FrameOrigin:
    """What the code says about a chain's first frame.

    `kind`: `read` (assigned from `pd.read_csv/read_parquet/read_feather/read_json`, the function
    in `reader`, `path` the literal or module-constant path when there is one), `parameter` (a
    parameter of the enclosing function), `assigned` (assigned from anything else) or `unknown`;
    `profile`: a `# chainlint: profile=NAME` comment on the assigning statement; `read_options`:
    the reader options the call passes as literals (`sep`, `header`, `na_values`, ...), lists as
    tuples and dictionaries as tuples of pairs; `unfollowed`: the call's options that may change
    its dtypes and are not followed (`converters`, `dtype_backend`, a computed `dtype`, `**`).
    """

    name: str
    kind: OriginKind
    reader: str | None = None
    path: str | None = None
    profile: str | None = None
    read_options: tuple[tuple[str, object], ...] = ()  # literal keyword arguments of the read call
    unfollowed: tuple[str, ...] = ()


@dataclass(frozen=True)
class Chain:
    """A maximal run of two or more row filters applied to one frame.

    `form` is `method` for one expression (`df[a].query(b)`), `statements` for a run of
    assignments (`x = df[a]` / `x = x[b]`) or `mask` for one written mask whose conjuncts are the
    steps (`df[(a) & (b)]`, `.query("a and b")`); `frame` is the source text of the first frame;
    `profile_comment` a `# chainlint: profile=NAME` on the chain's first line or the line above;
    `keep` the rules a `# chainlint: keep [RULE...]` there suppresses (empty: all of them).
    """

    path: str
    span: Span
    frame: str
    form: ChainForm
    steps: tuple[Step, ...]
    origin: FrameOrigin | None = None
    profile_comment: str | None = None
    keep: tuple[str, ...] | None = None
    cell: Cell | None = None

    def segments(self) -> tuple[tuple[int, ...], ...]:
        """Indices of the movable steps, grouped into the runs between barriers."""
        steps = self.steps
        runs = consecutive_runs(len(steps), lambda before, index: steps[before].movable and steps[index].movable)
        return tuple(tuple(run) for run in runs if steps[run[0]].movable)


def consecutive_runs(count: int, joins: Callable[[int, int], bool]) -> list[list[int]]:
    """The indices `0..count-1` cut into runs of neighbours: `joins(before, index)` says whether
    `index` continues the run that `before`, the index just before it, is in. The one walk over
    a chain's runs of steps (movable between barriers, planned together, fused)."""
    runs: list[list[int]] = []
    for index in range(count):
        if runs and joins(index - 1, index):
            runs[-1].append(index)
        else:
            runs.append([index])
    return runs
