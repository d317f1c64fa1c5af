"""The one error type for bad user input anywhere in cfarvec.

Every check of a user-supplied value raises :class:`SpecError`. The CLI turns
it into a single line on stderr and exit code 2; Python callers catch it as a
``ValueError``.
"""


class SpecError(ValueError):
    """A user-supplied value is out of range or of the wrong kind.

    Parameters
    ----------
    field : str
        Name of the offending field or option, as the user wrote it
        (e.g. ``"detector.ref_cells_per_side"`` or ``"--pfa"``).
    problem : str
        What is wrong, e.g. ``"got 0"``.
    allowed : str
        The allowed values or range, e.g. ``"an integer >= 1"``.
    """

    def __init__(self, field: str, problem: str, allowed: str):
        self.field = field
        self.problem = problem
        self.allowed = allowed
        super().__init__(f"{field}: {problem}; allowed: {allowed}")


def require(cond: bool, field: str, problem: str, allowed: str) -> None:
    """Raise :class:`SpecError` unless ``cond`` holds."""
    if not cond:
        raise SpecError(field, problem, allowed)
