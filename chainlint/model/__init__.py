"""The frozen values at the bottom of chainlint: every stage reads and builds them, none of them
imports a stage. Import them from here (`from chainlint.model import Chain, Finding`)."""

from chainlint.model.chains import Barrier, Chain, FrameOrigin, Step
from chainlint.model.files import FileAnalysis, FileError
from chainlint.model.findings import Edit, Finding
from chainlint.model.spans import Cell, CellLines, Span

__all__ = ["Barrier", "Cell", "CellLines", "Chain", "Edit", "FileAnalysis", "FileError", "Finding", "FrameOrigin", "Span", "Step"]
