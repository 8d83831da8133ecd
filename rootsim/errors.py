"""Exception hierarchy of rootsim.

Every error that a user can cause with bad input derives from :class:`RootsimError`.
The command line catches exactly this family, prints ``error: <message>`` on one line
and exits with code 2; anything else is a bug and is allowed to show a traceback.
"""

from __future__ import annotations

__all__ = [
    "RootsimError",
    "SpecError",
    "SegmentTableError",
    "SegmentBudgetError",
    "FormatError",
    "SamplingError",
]


class RootsimError(Exception):
    """Base class of all user-facing rootsim errors (one-line message)."""

    def cli_message(self) -> str:
        """Text printed after ``error:`` by the command line (a single line)."""
        return " ".join(str(self).split())


class SpecError(RootsimError, ValueError):
    """A parameter file is invalid.

    Parameters
    ----------
    file : str
        Path of the parameter file (or ``"<spec>"`` for specs built in memory).
    key_path : str
        Dotted path of the offending key, e.g. ``root_classes.primary.radius_cm``.
    problem : str
        What is wrong.
    allowed : str, optional
        What would be accepted.
    """

    def __init__(self, file: str, key_path: str, problem: str, allowed: str | None = None):
        self.file = str(file)
        self.key_path = key_path
        self.problem = problem
        self.allowed = allowed
        text = f"{self.file}: {key_path or '<top level>'}: {problem}"
        if allowed:
            text += f" (allowed: {allowed})"
        super().__init__(text)


class SegmentTableError(RootsimError, ValueError):
    """A segment table (``segments.parquet`` or a DataFrame) is missing columns or holds bad values."""


class SegmentBudgetError(RootsimError, RuntimeError):
    """Growth stopped because the run would exceed its segment budget.

    The budget (``run.max_segments``) bounds every store that grows with a run: the segments, the roots
    and the branch points waiting to carry a lateral (``store`` names the one that would pass it).
    """

    def __init__(self, budget: int, reached: int, day: float, *, store: str = "segments", plant: int | None = None):
        self.budget = int(budget)
        self.reached = int(reached)
        self.day = float(day)
        self.store = store
        where = f"on day {self.day:g}" + ("" if plant is None else f" (plant {plant})")
        if store == "segments":
            text = (f"segment budget of {self.budget:,} exceeded: the run had reached {self.reached:,} segments "
                    f"{where}; raise run.max_segments in the spec or pass --max-segments, or shorten the run with --days")
        else:
            text = (f"segment budget of {self.budget:,} exceeded by {store}: a plant held {self.reached:,} {store} "
                    f"{where} (each store of a run may hold at most run.max_segments items); check the branching "
                    "and emergence parameters (interbranch_distance_cm, roots_per_event), or raise run.max_segments")
        super().__init__(text)


class FormatError(RootsimError, ValueError):
    """A file format is unknown, or a file in a known format is malformed."""


class SamplingError(RootsimError, ValueError):
    """A virtual sampling geometry is invalid (e.g. a core outside the soil)."""
