"""The three kinds of failure, kept apart: the config author's, the data's, the model's.

The command line turns every `CohortstoneError` into a one-paragraph message and exit code 2.
"""
from __future__ import annotations


class CohortstoneError(Exception):
    """A problem the user can fix; shown without a traceback."""

    def __init__(self, message: str, *, file: str | None = None):
        self.file = file
        super().__init__(message)

    def describe(self) -> str:
        return str(self)


class ConfigError(CohortstoneError):
    """The config file is not what the contract expects (syntax, keys, values).

    `problems` holds one line per fault so a whole file is reported in one pass.
    """

    def __init__(self, problems: list[str] | str, *, file: str | None = None):
        self.problems = [problems] if isinstance(problems, str) else list(problems)
        where = f"{file}: " if file else ""
        if len(self.problems) == 1:
            text = f"{where}{self.problems[0]}"
        else:
            text = f"{where}{len(self.problems)} problems in the config:\n" + "\n".join(
                f"  - {p}" for p in self.problems
            )
        super().__init__(text, file=file)


class DataError(CohortstoneError):
    """The data do not fit the config: a missing column, a bad code, a bad weight."""


class DesignError(CohortstoneError):
    """The survey design cannot give a variance as asked (e.g. a single-cluster stratum)."""


class FitError(CohortstoneError):
    """A model cannot be fitted at all (e.g. no rows, no variation in the outcome)."""


class CohortstoneWarning(UserWarning):
    """Base class of every warning the package raises."""


class FitWarning(CohortstoneWarning):
    """A fit finished but its numbers need care (separation, non-convergence)."""
