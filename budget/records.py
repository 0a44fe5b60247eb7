"""Append-only run records (schema ``busbudget.record/1``, one JSON object per line).

A production bench appends one record per unit and run.  The guarantees:

* **Whole or nothing.**  A record is encoded to one byte string and written by a
  single ``os.write`` on a descriptor opened with ``O_APPEND``, while holding an
  exclusive ``fcntl.flock`` on the log; the byte count is checked and the data are
  ``fsync``-ed before the lock is released.  On a short write, ``ENOSPC`` or any
  other I/O error the file is truncated back to its size before the call (still
  under the lock) and :class:`budget.errors.RecordError` is raised.  No retry loop
  is used: a second ``write`` could land after another writer's record.
* **No lost records with several writers.**  Every writer of this module takes the
  same lock, so records never interleave.  A log whose last line has no newline
  (a torn tail left by another program or a crash) is not repaired; the next record
  starts on a new line, so it stays whole and the damaged line stays visible.
* **Reading tolerates damage.**  :func:`read_records` never raises on a corrupt or
  torn line; it returns the good records and a list of problems naming the line.

``flock`` locks are advisory: programs that append without taking the lock are not
kept out (their lines are still reported if they are torn).  Network file systems
may not honour ``flock``; keep bench logs on a local disk.
"""
from __future__ import annotations

import datetime as _dt
import errno
import fcntl
import hashlib
import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path

from .errors import ArgumentError, RecordError

SCHEMA = "busbudget.record/1"
# keys every record carries (docs/cli.md), in the order they are written
KEYS = ("schema", "time", "serial", "command", "design_sha256", "inputs_sha256", "verdict", "worst",
        "margins", "tool_version")
VERDICTS = ("pass", "fail")
# A record above this size is refused: one record is one bench run, not a data dump,
# and a single write of a few KiB is what the whole-or-nothing rule is tested with.
MAX_RECORD_BYTES = 1 << 20


# ---------------------------------------------------------------------------
# hashes of the inputs

def sha256_bytes(data: bytes) -> str:
    """Hex SHA-256 of ``data``."""
    return hashlib.sha256(data).hexdigest()


def sha256_file(path) -> str:
    """Hex SHA-256 of the bytes of the file at ``path`` (ArgumentError naming it if unreadable)."""
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 16), b""):
                h.update(block)
    except OSError as exc:
        raise ArgumentError(f"{path}: cannot read for hashing ({exc.strerror or exc})") from None
    return h.hexdigest()


def hash_inputs(files=(), *, settings=()) -> dict:
    """The ``inputs_sha256`` entry of a record: {label: hex SHA-256} of every input but the design.

    files: paths of the values / capture / TDR files, labelled by the path as given;
    settings: ``PATH=VALUE`` strings from the command line, hashed together (in the
    order given, one per line, UTF-8) under the label ``"--set"``.
    """
    out = {}
    for p in files:
        out[str(p)] = sha256_file(p)
    if settings:
        out["--set"] = sha256_bytes("".join(f"{s}\n" for s in settings).encode("utf-8"))
    return out


# ---------------------------------------------------------------------------
# building and appending

def utc_now() -> str:
    """The current time as ISO 8601 UTC with milliseconds, e.g. ``2026-12-02T13:17:37.123Z``."""
    now = _dt.datetime.now(_dt.timezone.utc)
    return now.isoformat(timespec="milliseconds").replace("+00:00", "Z")


def make_record(*, serial: str, command: str, verdict: str, design_sha256: str | None = None,
                inputs_sha256: dict | None = None, worst=None, margins: dict | None = None,
                time: str | None = None, tool_version: str | None = None) -> dict:
    """A record dict in the key order of the schema; ``time`` and ``tool_version`` default to now / this version.

    margins: {receiver: worst margin [V]} (None for a receiver without one).
    """
    if tool_version is None:
        from . import __version__ as tool_version
    rec = {"schema": SCHEMA, "time": time or utc_now(), "serial": serial, "command": command,
           "design_sha256": design_sha256, "inputs_sha256": dict(inputs_sha256 or {}), "verdict": verdict,
           "worst": worst, "margins": dict(margins or {}), "tool_version": tool_version}
    validate_record(rec)
    return rec


def _bad(msg):
    raise ArgumentError(f"record: {msg}")


def validate_record(rec: dict) -> None:
    """Raise ArgumentError naming the key if ``rec`` does not follow busbudget.record/1."""
    if not isinstance(rec, dict):
        _bad(f"expected a dict, got {type(rec).__name__}")
    missing = [k for k in KEYS if k not in rec and k != "schema"]
    if missing:
        _bad(f"missing key(s): {', '.join(missing)}")
    if rec.get("schema", SCHEMA) != SCHEMA:
        _bad(f"schema must be {SCHEMA!r}, got {rec.get('schema')!r}")
    serial = rec["serial"]
    if not isinstance(serial, str) or not serial.strip():
        _bad("serial must be a non-empty string")
    if any(ord(c) < 32 or ord(c) == 127 for c in serial):
        _bad(f"serial {serial!r} contains control characters")
    for key in ("time", "command", "tool_version"):
        if not isinstance(rec[key], str) or not rec[key]:
            _bad(f"{key} must be a non-empty string")
    try:
        _dt.datetime.fromisoformat(rec["time"].replace("Z", "+00:00"))
    except ValueError:
        _bad(f"time {rec['time']!r} is not ISO 8601")
    if rec["verdict"] not in VERDICTS:
        _bad(f"verdict must be one of {', '.join(VERDICTS)}, got {rec['verdict']!r}")
    if rec["design_sha256"] is not None and not _is_hex256(rec["design_sha256"]):
        _bad("design_sha256 must be a hex SHA-256 digest or None")
    if not isinstance(rec["inputs_sha256"], dict) or not all(
            isinstance(k, str) and _is_hex256(v) for k, v in rec["inputs_sha256"].items()):
        _bad("inputs_sha256 must map input names to hex SHA-256 digests")
    if not isinstance(rec["margins"], dict):
        _bad("margins must map receiver names to margins [V]")
    for name, m in rec["margins"].items():
        if m is not None and (isinstance(m, bool) or not isinstance(m, (int, float)) or not math.isfinite(m)):
            _bad(f"margins[{name!r}] must be a finite number of volts or None, got {m!r}")


def _is_hex256(s) -> bool:
    return isinstance(s, str) and len(s) == 64 and all(c in "0123456789abcdef" for c in s)


def margins_by_receiver(results) -> dict:
    """{receiver: worst margin [V]} over result rows with the contract keys of check/judge JSON
    (``receiver``, ``margin_high``, ``margin_low``); None for a receiver with no margin at all."""
    out = {}
    for row in results:
        ms = [m for m in (row.get("margin_high"), row.get("margin_low")) if m is not None]
        name = row["receiver"]
        best = out.get(name)
        low = min(ms) if ms else None
        if name not in out:
            out[name] = low
        elif low is not None:
            out[name] = low if best is None else min(best, low)
    return out


def record_from_report(doc: dict, *, serial: str, command: str, design_path=None, input_files=(),
                       settings=()) -> dict:
    """A record from a command's JSON document (``check``/``judge``: keys verdict, worst, results).

    design_path: the design file (hashed; None for a bundled example given by name);
    input_files, settings: see :func:`hash_inputs`.
    """
    return make_record(serial=serial, command=command, verdict=doc["verdict"],
                       design_sha256=None if design_path is None else sha256_file(design_path),
                       inputs_sha256=hash_inputs(input_files, settings=settings), worst=doc.get("worst"),
                       margins=margins_by_receiver(doc.get("results", ())))


def encode_record(rec: dict) -> bytes:
    """One line of UTF-8 JSON (no NaN, no inner newline) ending in ``\\n``."""
    try:
        text = json.dumps(rec, allow_nan=False, ensure_ascii=False, separators=(",", ":"))
    except (TypeError, ValueError) as exc:
        raise ArgumentError(f"record: cannot be written as JSON ({exc})") from None
    data = (text + "\n").encode("utf-8")
    if len(data) > MAX_RECORD_BYTES:
        raise ArgumentError(f"record: {len(data)} bytes, more than the {MAX_RECORD_BYTES} allowed")
    return data


def append_record(path, record: dict) -> dict:
    """Append ``record`` (schema busbudget.record/1) to the log at ``path`` as one whole line.

    Missing ``schema`` is filled in.  Returns the record as written.  Raises
    ArgumentError for an invalid record or an unusable path, RecordError when the
    line could not be written whole (the log is then unchanged).
    """
    rec = {"schema": SCHEMA, **record}
    rec = {k: rec[k] for k in KEYS if k in rec} | {k: v for k, v in rec.items() if k not in KEYS}
    validate_record(rec)
    data = encode_record(rec)
    target = Path(path)
    if target.is_dir():
        raise ArgumentError(f"{path}: is a directory")
    try:
        fd = os.open(target, os.O_RDWR | os.O_APPEND | os.O_CREAT | os.O_CLOEXEC, 0o644)
    except OSError as exc:
        raise ArgumentError(f"{path}: cannot open the log for appending ({exc.strerror or exc})") from None
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX)
        except OSError as exc:
            raise RecordError(f"{path}: cannot lock the log ({exc.strerror or exc})") from None
        try:
            size = os.fstat(fd).st_size
            if size > 0 and os.pread(fd, 1, size - 1) != b"\n":
                data = b"\n" + data  # a torn tail from elsewhere: keep it, start our record on a new line
        except OSError as exc:
            raise RecordError(f"{path}: cannot read the end of the log ({exc.strerror or exc})") from None
        try:
            n = os.write(fd, data)
            if n != len(data):
                raise OSError(errno.EIO, f"short write ({n} of {len(data)} bytes)")
            os.fsync(fd)
        except OSError as exc:
            _cut_back(fd, size)
            reason = "the disk is full" if exc.errno == errno.ENOSPC else (exc.strerror or str(exc))
            raise RecordError(f"{path}: record for serial {rec['serial']!r} not written: {reason}; "
                              "the log is unchanged") from None
    finally:
        os.close(fd)  # also releases the lock
    return rec


def _cut_back(fd, size) -> None:
    """Truncate the log back to ``size`` bytes after a failed append (best effort, lock held)."""
    try:
        os.ftruncate(fd, size)
        os.fsync(fd)
    except OSError:
        pass


# ---------------------------------------------------------------------------
# reading

@dataclass(frozen=True)
class LogProblem:
    """A line of a log that is not a whole record: line number (1-based), kind, and its start."""
    line: int
    kind: str      # "torn tail" | "not JSON" | "not a record"
    text: str

    def __str__(self):
        return f"line {self.line}: {self.kind}: {self.text!r}"


@dataclass(frozen=True)
class RecordLog:
    """Records read back from a log, and the lines that are not whole records."""
    path: str
    records: list = field(default_factory=list)
    problems: list = field(default_factory=list)
    lines: list = field(default_factory=list)   # line number of each record

    @property
    def torn_tail(self) -> LogProblem | None:
        """The unterminated last line, if there is one."""
        return next((p for p in self.problems if p.kind == "torn tail"), None)


def read_records(path) -> RecordLog:
    """Read every record of the log at ``path``; never raises on damaged lines (see RecordLog.problems).

    Raises ArgumentError only when the file itself cannot be read.
    """
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except OSError as exc:
        raise ArgumentError(f"{path}: cannot read the log ({exc.strerror or exc})") from None
    records, problems, lines = [], [], []
    chunks = data.split(b"\n")
    tail = chunks.pop()  # b"" when the file ends in a newline
    for i, raw in enumerate(chunks, start=1):
        if not raw.strip():
            continue
        rec, why = _parse_line(raw)
        if why is None:
            records.append(rec)
            lines.append(i)
        else:
            problems.append(LogProblem(i, why, _excerpt(raw)))
    if tail:
        problems.append(LogProblem(len(chunks) + 1, "torn tail", _excerpt(tail)))
    return RecordLog(str(path), records, problems, lines)


def _parse_line(raw: bytes):
    try:
        rec = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, ValueError):
        return None, "not JSON"
    if not isinstance(rec, dict) or rec.get("schema") != SCHEMA or any(k not in rec for k in KEYS):
        return None, "not a record"
    return rec, None


def _excerpt(raw: bytes, n: int = 60) -> str:
    text = raw.decode("utf-8", errors="replace")
    return text if len(text) <= n else text[:n] + "..."


# ---------------------------------------------------------------------------
# text table for people

def worst_text(worst) -> str:
    """A short description of a record's ``worst`` entry."""
    if not isinstance(worst, dict):
        return "-" if worst is None else str(worst)
    parts = []
    if worst.get("driver") or worst.get("receiver"):
        parts.append(f"{worst.get('driver', '?')}->{worst.get('receiver', '?')}")
    for k in ("edge", "corner", "metric"):
        if worst.get(k):
            parts.append(str(worst[k]))
    v = worst.get("value", worst.get("headroom"))
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        parts.append(f"{v:+.3f} V")
    return " ".join(parts) or "-"


def log_table(log: RecordLog) -> str:
    """Records as a text table (time, serial, command, verdict, worst), then the damaged lines."""
    rows = [("time", "serial", "command", "verdict", "worst")]
    for r in log.records:
        rows.append((str(r["time"]), str(r["serial"]), str(r["command"]), str(r["verdict"]).upper(),
                     worst_text(r["worst"])))
    widths = [max(len(row[i]) for row in rows) for i in range(5)]
    out = ["  ".join(c.ljust(w) for c, w in zip(row, widths)).rstrip() for row in rows]
    out.append(f"{len(log.records)} record(s) in {log.path}")
    for p in log.problems:
        out.append(f"damaged: {p}")
    return "\n".join(out) + "\n"
