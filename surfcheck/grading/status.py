"""The decision of one order at one station or over a seam, and the one rule that combines them."""

from __future__ import annotations

from enum import Enum
from typing import Iterable


class Status(str, Enum):
    """ok: the order holds beyond the uncertainty; fail: it is broken beyond it; not resolved: the
    data cannot decide (the value lies within the expanded uncertainty of the tolerance, or there is no
    value). A plain string in JSON and in comparisons (``Status.OK == "ok"``)."""

    OK = "ok"
    FAIL = "fail"
    NOT_RESOLVED = "not resolved"

    def __str__(self) -> str:
        return self.value

    @classmethod
    def combine(cls, statuses: Iterable[str]) -> "Status":
        """Fail when one fails, ok when all (and at least one) are ok, else not resolved (the rule of
        a seam over its stations and of a station over several orders)."""
        found = [cls(s) for s in statuses]
        if cls.FAIL in found:
            return cls.FAIL
        if found and all(s is cls.OK for s in found):
            return cls.OK
        return cls.NOT_RESOLVED
