"""The frozen values at the bottom of chainlint: every stage reads and builds them, none of them
imports a stage. Import them from here (`from chainlint.model import Chain, Finding`)."""

from chainlint.model.chains import Barrier, BarrierKind, Chain, ChainForm, FrameOrigin, MaskFrame, OriginKind, Step, StepKind, consecutive_runs
from chainlint.model.errors import ChainlintError
from chainlint.model.files import FileAnalysis, FileProblem
from chainlint.model.findings import Edit, Finding
from chainlint.model.spans import Cell, CellLines, Span

__all__ = [
    "Barrier",
    "BarrierKind",
    "Cell",
    "CellLines",
    "Chain",
    "ChainForm",
    "ChainlintError",
    "Edit",
    "FileAnalysis",
    "FileProblem",
    "Finding",
    "FrameOrigin",
    "MaskFrame",
    "OriginKind",
    "Span",
    "Step",
    "StepKind",
    "consecutive_runs",
]
