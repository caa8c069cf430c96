"""The one exception type a user can cause.

Every problem with a user's input — a scenario file, a trace, a factor table, an output
folder — is raised as :class:`InputError`. It carries the file, the field or row, and what
is wrong; the command line prints it as one line and exits with code 2.
"""
from __future__ import annotations

from pathlib import Path


class InputError(Exception):
    """Bad input from the user, reported as one line.

    Parameters
    ----------
    message : str
        What is wrong, in plain words.
    file : str or Path, optional
        The file the problem is in.
    where : str, optional
        The field (dotted path such as ``trucks[1].battery.capacity``) or the row
        (``row 12``) the problem is at.
    """

    def __init__(self, message: str, file: str | Path | None = None, where: str | None = None):
        self.message = message
        self.file = str(file) if file is not None else None
        self.where = where
        super().__init__(self.line())

    def __reduce__(self):
        # keep file and where when the error crosses a process boundary (pickle)
        return (InputError, (self.message, self.file, self.where))

    def line(self) -> str:
        """The one-line form: ``file: where: message``.

        Always one line: line breaks inside an echoed value, key or file name are shown
        as ``\\n``, control characters are replaced and a very long line is cut (see
        :func:`tco.text.one_line`).
        """
        from tco.text import one_line

        parts = [p for p in (self.file, self.where) if p]
        parts.append(self.message)
        return one_line(": ".join(parts))

    def located(self, file: str | Path | None = None, where: str | None = None) -> "InputError":
        """Return a copy with the file and/or location filled in where still missing."""
        return InputError(
            self.message,
            file=self.file or (str(file) if file is not None else None),
            where=self.where or where,
        )
