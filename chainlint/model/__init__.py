"""The frozen values at the bottom of chainlint: every stage reads and builds them, none of them
imports a stage. Import them from here (`from chainlint.model import Chain, Finding`)."""

from chainlint.model.chains import Barrier, BarrierKind, Chain, ChainForm, FrameOrigin, MaskFrame, OriginKind, Step, StepKind
from chainlint.model.files import FileAnalysis, FileError
from chainlint.model.findings import Edit, Finding
from chainlint.model.spans import Cell, CellLines, Span

__all__ = ["Barrier", "BarrierKind", "Cell", "CellLines", "Chain", "ChainForm", "Edit", "FileAnalysis", "FileError", "Finding", "FrameOrigin", "MaskFrame", "OriginKind", "Span", "Step",
           "StepKind"]
