"""Problems users see, and the errors that carry them.

A :class:`Problem` names the file, the line and column, the field path, what
is wrong and how to fix it. Loaders collect every problem before anything
stops, so a user fixes a whole project in one pass (the pattern of MkDocs'
configuration errors).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass


@dataclass(frozen=True, order=True)
class Problem:
    """One thing wrong with the user's input.

    Parameters
    ----------
    file
        Path as the user should see it (relative to the project folder).
    line, column
        1-based position in the file; 0 when the problem is about the whole
        file (for example a file that is missing).
    field
        Dotted path of the field (``components.A.astrometry[0].parallax``);
        empty when the problem is not about one field.
    message
        What is wrong, in one sentence.
    fix
        What to do about it, in one sentence.
    """

    file: str
    line: int
    column: int
    field: str
    message: str
    fix: str

    def __str__(self) -> str:
        where = self.file if self.line == 0 else f"{self.file}:{self.line}:{self.column}"
        field = f" {self.field}:" if self.field else ""
        return _printable(f"{where}:{field} {self.message} Fix: {self.fix}")

    def to_dict(self) -> dict[str, object]:
        return asdict(self)


def _printable(text: str) -> str:
    """Control characters escaped (``\\x1b``): a name taken from a hostile file cannot drive the terminal."""
    return "".join(c if c.isprintable() else ascii(c)[1:-1] for c in text)


class DossierError(Exception):
    """An error the user can act on; the CLI prints it without a traceback."""

    exit_code = 2


class ProblemsFound(DossierError):
    """The project has problems; all of them are attached."""

    exit_code = 1

    def __init__(self, problems: list[Problem]):
        self.problems = sorted(problems)
        super().__init__(f"{len(self.problems)} problem(s) found")
