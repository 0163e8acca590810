"""Exceptions shared by the library.

A user's mistake in a case (or in a model built in code) raises
:class:`CaseError`, which carries the key path into the case file so that the
command line can print ``file: key: what is wrong`` and exit with status 2.
"""
from __future__ import annotations


class CaseError(ValueError):
    """Invalid input, located by its key path in the case file.

    Parameters
    ----------
    key : str
        Key path into the case, e.g. ``"members[12].section"``; empty when the
        problem concerns the whole file.
    message : str
        What was found and what was expected.
    file : str, optional
        Path of the case file, filled in by the reader.
    """

    def __init__(self, key: str, message: str, file: str | None = None):
        self.key = key
        self.message = message
        self.file = file
        super().__init__(self.__str__())

    def with_file(self, file: str) -> "CaseError":
        return type(self)(self.key, self.message, file)

    def __str__(self) -> str:
        # one line whatever the message holds: the command line prints it as
        # ``cablefe: file: key: message`` and tools read one line per error
        parts = [p for p in (self.file, self.key) if p]
        return " ".join(": ".join(parts + [str(self.message)]).split("\n"))


class UnknownResultError(CaseError):
    """A result asked for by name (``names`` of :func:`cablefe.solve`,
    ``--only`` on the command line) that the case does not define."""


class MechanismError(ValueError):
    """The structure can move without resistance in some directions.

    Parameters
    ----------
    free_motions : list of (node id, direction)
        The nodes and directions (``"x"``, ``"ry"`` …) found without stiffness.
    """

    def __init__(self, free_motions, detail: str = ""):
        self.free_motions = list(free_motions)
        shown = ", ".join(f"{n} {d}" for n, d in self.free_motions[:12])
        more = len(self.free_motions) - 12
        if more > 0:
            shown += f" (+{more} more)"
        msg = f"mechanism: no stiffness at {shown}" if shown else "mechanism: singular stiffness"
        if detail:
            msg += f" ({detail})"
        super().__init__(msg)
