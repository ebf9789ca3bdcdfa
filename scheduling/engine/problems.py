"""Problems found in a network, and the error that carries all of them at once."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

#: More problems than this are summarised, so a hostile document cannot make
#: the error report itself unbounded.
MAX_PROBLEMS = 1000


@dataclass(frozen=True, slots=True)
class Problem:
    """One thing wrong with a network document.

    ``pointer`` is a JSON pointer (RFC 6901) to the offending entry, e.g.
    ``/activities/3/duration``; ``code`` a short stable identifier for programs;
    ``message`` a sentence for people that names the activity, relation or field.
    """

    pointer: str
    code: str
    message: str

    def __str__(self) -> str:
        return f"{self.pointer or '/'}: {self.message}"

    def as_dict(self) -> dict[str, str]:
        return {"pointer": self.pointer, "code": self.code, "message": self.message}


class NetworkInvalid(ValueError):
    """Raised when a network cannot be scheduled; lists every problem found."""

    def __init__(self, problems: Iterable[Problem]):
        listed = list(problems)
        if len(listed) > MAX_PROBLEMS:
            rest = len(listed) - MAX_PROBLEMS
            listed = listed[:MAX_PROBLEMS] + [
                Problem("", "too_many_problems", f"and {rest} more problems not listed")
            ]
        self.problems: tuple[Problem, ...] = tuple(listed)
        super().__init__("\n".join(str(p) for p in self.problems))


def pointer(*parts: object) -> str:
    """Build a JSON pointer from path parts, escaping ``~`` and ``/`` (RFC 6901)."""
    return "".join("/" + str(p).replace("~", "~0").replace("/", "~1") for p in parts)
