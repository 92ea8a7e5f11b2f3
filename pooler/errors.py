"""One error family for everything the user can get wrong.

The CLI turns every :class:`PoolerError` into a one-line message and exit code 2
in one place (``pooler.cli``); library users catch :class:`PoolerError`.
"""
from __future__ import annotations

from collections.abc import Mapping


class PoolerError(Exception):
    """Base class of all errors that pooler raises on purpose."""


class InputError(PoolerError):
    """Bad input, located as precisely as we can: file, sheet row, column.

    Parameters
    ----------
    message : str
        What is wrong and, where possible, how to fix it.
    file : str, optional
        The file the problem is in.
    row : int, optional
        The sheet's own row number (the header row is 1).
    column : str, optional
        The column name as the sheet spells it.
    """

    def __init__(self, message: str, *, file: str | None = None,
                 row: int | None = None, column: str | None = None):
        self.message = message
        self.file = file
        self.row = row
        self.column = column
        super().__init__(self.__str__())

    def located(self, *, file: str | None = None) -> "InputError":
        """Return a copy that names ``file`` when this error names none."""
        return InputError(self.message, file=self.file or file,
                          row=self.row, column=self.column)

    def __str__(self) -> str:
        where = []
        if self.file:
            where.append(str(self.file))
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column:
            where.append(f"column '{self.column}'")
        return (", ".join(where) + ": " if where else "") + self.message


class OptionError(PoolerError):
    """An option value that cannot be used.

    Parameters
    ----------
    message : str
        What is wrong, naming the parameter in backticks as the library spells it
        (```safeguard_level` must lie in (0, 1), not 1.5``).
    parameter : str, optional
        The parameter at fault; by default the backticked name the message starts with.
        The command line uses it to name its own flag instead (:meth:`naming`).
    """

    def __init__(self, message: str, *, parameter: str | None = None):
        if parameter is None and message.startswith("`"):
            parameter = message[1:].partition("`")[0] or None
        self.message = message
        self.parameter = parameter
        super().__init__(message)

    def naming(self, flags: Mapping[str, str]) -> str:
        """The message with each backticked parameter that has an entry in ``flags``
        (parameter name -> what the user typed, e.g. ``"--safeguard"``) named that way."""
        out = self.message
        for name, flag in flags.items():
            out = out.replace(f"`{name}`", flag)
        return out


class InputErrors(InputError):
    """Several located input problems found in one pass over a sheet.

    Behaves as its first error (``file``, ``row``, ``column``, ``message``) so code that
    handles one :class:`InputError` keeps working; ``errors`` holds them all, and the text
    lists every one (up to ``MAX_SHOWN``) on its own line.
    """

    MAX_SHOWN = 50

    def __init__(self, errors):
        self.errors = tuple(errors)
        first = self.errors[0]
        super().__init__(first.message, file=first.file, row=first.row, column=first.column)

    def __str__(self) -> str:
        first = InputError.__str__(self)
        n = len(self.errors)
        if n == 1:
            return first
        shown = self.errors[1:self.MAX_SHOWN]
        lines = [f"{first}  [problem 1 of {n}; the others follow]"]
        lines += [f"  - {e}" for e in shown]
        if n > self.MAX_SHOWN:
            lines.append(f"  ... and {n - self.MAX_SHOWN} more; fix these and run again")
        return "\n".join(lines)
