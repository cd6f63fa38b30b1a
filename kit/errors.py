"""The kit's exception and warning classes, all in one place."""


class RotorbookError(Exception):
    """Base class of every error the kit raises on purpose."""


class DesignError(RotorbookError, ValueError):
    """A design file is missing, malformed or physically impossible.

    ``problems`` lists every problem found, one line each, as
    ``field path: bad value -> what is allowed``.
    """

    def __init__(self, problems, path=None):
        if isinstance(problems, str):
            problems = [problems]
        self.problems = list(problems)
        self.path = path
        where = f"{path}: " if path else ""
        super().__init__(where + "; ".join(self.problems))


class EquilibriumNotFound(RotorbookError):
    """No relaxed-hover equilibrium satisfies the equations within the thrust limits."""


class AnalysisError(RotorbookError):
    """An analysis could not be carried out for a design: a numerical routine failed on its
    figures, or it ran past its time limit. A case that meets one becomes a result with the
    reason; the message names the figure or field that caused it where that is known."""


class OptionError(RotorbookError, ValueError):
    """A command-line option names something the design does not have, or is out of range."""


class RecordError(RotorbookError):
    """A calculation record could not be written (existing file, failed workbook, bad option)."""


class Terminated(BaseException):
    """The run received SIGTERM; raised (not an Exception) so every ``with`` block unwinds."""


class DesignWarning(UserWarning):
    """A design file is valid but something in it deserves a second look."""


class CacheWarning(UserWarning):
    """A cached generated module was stale or corrupt and has been rebuilt."""
