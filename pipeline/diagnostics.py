"""Diagnostics: errors and warnings a user can act on.

Every problem found in the input is a :class:`Diagnostic` naming the file, the
key path inside it, and a message that says what was found and what is
expected.  They are printed as ``file: key: message`` (or as JSON with
``--json``) and never as a traceback.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass


@dataclass(frozen=True)
class Diagnostic:
    """One problem in one place of one input file."""

    file: str
    key: str
    message: str
    severity: str = "error"  # "error" | "warning"

    def __str__(self) -> str:
        where = f"{self.file}: {self.key}: " if self.key else f"{self.file}: "
        tag = "" if self.severity == "error" else "warning: "
        return f"{where}{tag}{self.message}"

    def as_dict(self) -> dict:
        return asdict(self)


class InputError(Exception):
    """Raised with every diagnostic of a file (or of a database) that failed."""

    def __init__(self, diagnostics: list[Diagnostic]):
        self.diagnostics = list(diagnostics)
        super().__init__("\n".join(str(d) for d in self.diagnostics))
