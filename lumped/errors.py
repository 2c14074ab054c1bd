"""The errors lumped raises for things a user can get wrong. All subclass ValueError."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

__all__ = ["LumpedError", "Problem", "ModelError"]


class LumpedError(ValueError):
    """Base of every error lumped raises about its inputs; its message is for people."""

    def lines(self) -> list[str]:
        """The message as lines, one per problem."""
        return str(self).splitlines()


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a system: where (item and field) and what."""

    item: str  # e.g. "springs.tyre", or "" for the file as a whole
    field: str  # e.g. "stiffness", or "" for the item as a whole
    message: str

    def __str__(self) -> str:
        where = ".".join(part for part in (self.item, self.field) if part)
        return f"{where}: {self.message}" if where else self.message


class ModelError(LumpedError):
    """A system (a file, or one built in code) that cannot be used, with every problem found.

    ``problems`` lists each :class:`Problem`; ``source`` names the file (or how the
    system was made). The message has a head line and then one line per problem.
    """

    def __init__(self, problems: Iterable[Problem], source: str = "system"):
        self.problems = list(problems)
        self.source = source
        count = len(self.problems)
        head = f"{source}: {count} problem{'s' if count != 1 else ''}"
        super().__init__("\n".join([head] + [f"  {source}: {p}" for p in self.problems]))

    def lines(self) -> list[str]:
        """One line per problem, each naming the source, item and field."""
        return [f"{self.source}: {p}" for p in self.problems]
