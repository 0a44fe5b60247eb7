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
        where = _short(source, 200)
        if table is not None:
            where += f": [{_short(table, 80)}]"
        if key is not None:
            where += f" {_short(key, 80)}"
        super().__init__(f"{where}: {_short(message, 1000)}")


def _short(text, limit: int) -> str:
    """``text`` as shown in a message: at most ``limit`` characters (a hostile key may be megabytes)."""
    text = str(text)
    return text if len(text) <= limit else text[:limit] + f"... ({len(text)} characters)"


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


class RecordError(BusBudgetError):
    """A record could not be appended to a log file (full disk, short write, I/O error).

    Raised by :func:`budget.records.append_record`.  The log is left exactly as it
    was before the call (the partial line is cut off again under the file lock);
    the message names the log file and the operating-system reason.
    """


class CaptureError(BusBudgetError, ValueError):
    """A captured waveform (bench / oscilloscope export or TDR trace) is unusable.

    Raised by :mod:`budget.capture` and :mod:`budget.tdr`.  The message names the
    file and, where there is one, the line and column: ``file: line 7, column 'CH1': reason``.
    """

    def __init__(self, message, *, source="<capture>", line=None, column=None):
        self.source = source
        self.line = line
        self.column = column
        self.reason = message
        where = source
        if line is not None:
            where += f": line {line}"
        if column is not None:
            where += f"{',' if line is not None else ':'} column {column!r}"
        super().__init__(f"{where}: {message}")

class GeometryRangeWarning(UserWarning):
    """A cross-section is outside the range its closed-form formula was fitted or proven for.

    Issued by :func:`budget.geometry.line`; the result is still computed, but its
    stated accuracy no longer applies.  The message names the formula, the
    dimension ratio and the range.
    """
