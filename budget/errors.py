"""The one exception root of busbudget and its subclasses.

Every error the library raises on purpose derives from :class:`BusBudgetError`.
Errors caused by what the user gave us (a design file, an argument, a parameter
path) also derive from :class:`ValueError`, so generic ``except ValueError``
handlers keep working.
"""


class BusBudgetError(Exception):
    """Root of every error raised by busbudget on purpose."""


class DesignError(BusBudgetError, ValueError):
    """A design (file, text or in-memory override) is malformed or non-physical.

    Raised by :func:`budget.load`, :func:`budget.loads` and
    :meth:`budget.Design.with_values`.  The message always names where the bad
    value came from: ``file: [table] key: reason``.
    """

    def __init__(self, message, *, source="<design>", table=None, key=None):
        self.source = source
        self.table = table
        self.key = key
        self.reason = message
        where = source
        if table is not None:
            where += f": [{table}]"
        if key is not None:
            where += f" {key}"
        super().__init__(f"{where}: {message}")


class ArgumentError(BusBudgetError, ValueError):
    """A function or command-line argument is invalid (unknown tap, bad edge...).

    The message names the argument and lists the allowed values where there is
    a finite set of them.
    """


class SimulationError(BusBudgetError):
    """The numerical engine could not produce a trustworthy result.

    For example a nodal matrix that is singular because part of the network has
    no path to ground.  The message names the part of the design involved.
    """


class GeometryRangeWarning(UserWarning):
    """A cross-section is outside the range its closed-form formula was fitted or proven for.

    Issued by :func:`budget.geometry.line`; the result is still computed, but its
    stated accuracy no longer applies.  The message names the formula, the
    dimension ratio and the range.
    """
