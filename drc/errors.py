"""Source locations, and input errors as values that carry one."""

from __future__ import annotations

from typing import NamedTuple


class Location(NamedTuple):
    """A place in a file: 1-based line and column."""

    path: str
    line: int
    column: int

    def __str__(self) -> str:
        return f"{self.path}:{self.line}:{self.column}"


class InputError(Exception):
    """An unusable input: the command line turns it into one line and exit status 2."""

    def __init__(self, location: Location | None, message: str):
        super().__init__(message)
        self.location = location
        self.message = message

    def __str__(self) -> str:
        where = self.location if self.location is not None else "drc"
        return f"{where}: error: {self.message}"


class InputErrors(Exception):
    """Several input errors found in one pass; each becomes one line on stderr."""

    def __init__(self, errors: list[InputError]):
        super().__init__("; ".join(str(e) for e in errors))
        self.errors = list(errors)


def location_of_path(path: str) -> Location:
    """The location used for a problem with a whole file (line 1, column 1)."""
    return Location(path, 1, 1)
