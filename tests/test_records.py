"""Run records (busbudget.record/1): whole lines only, nothing lost with concurrent writers,
a full disk leaves the log unchanged, damaged lines are reported on reading."""
from __future__ import annotations

import errno
import json
import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from budget import records
from budget.cli import main
from budget.errors import ArgumentError, BusBudgetError, RecordError
from budget.records import append_record, make_record, read_records

HEX0 = "0" * 64


def rec(serial="SN-0001", **kw):
    args = dict(serial=serial, command="check", verdict="pass", design_sha256=HEX0,
                worst={"driver": "U1", "receiver": "U4", "edge": "rise", "corner": "nominal",
                       "metric": "margin_high", "value": 0.412},
                margins={"U4": 0.412, "U5": None})
    args.update(kw)
    return make_record(**args)


def test_round_trip_keeps_every_key_in_schema_order(tmp_path):
    log = tmp_path / "bench.log"
    written = [append_record(log, rec(f"SN-{i}")) for i in range(3)]
    back = read_records(log)
    assert back.problems == [] and back.torn_tail is None
    assert back.records == written
    assert list(back.records[0]) == list(records.KEYS)
    assert back.records[0]["schema"] == "busbudget.record/1"
    assert back.records[0]["time"].endswith("Z")
    assert back.lines == [1, 2, 3]
    raw = log.read_bytes()
    assert raw.count(b"\n") == 3 and raw.endswith(b"\n")


def test_sha256_helpers_against_the_published_test_vector(tmp_path):
    # FIPS 180-2, "Secure Hash Standard", 2002, Appendix B.1: SHA-256("abc")
    abc = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert records.sha256_bytes(b"abc") == abc
    f = tmp_path / "values.toml"
    f.write_bytes(b"abc")
    assert records.sha256_file(f) == abc
    h = records.hash_inputs([f], settings=["lines.trunk.z0=52 ohm"])
    assert h[str(f)] == abc
    assert h["--set"] == records.sha256_bytes(b"lines.trunk.z0=52 ohm\n")
    with pytest.raises(ArgumentError, match="nope.csv"):
        records.sha256_file(tmp_path / "nope.csv")


BAD_RECORDS = [
    ("empty-serial", dict(serial="  "), "serial"),
    ("serial-with-newline", dict(serial="SN\n2"), "control characters"),
    ("unknown-verdict", dict(verdict="maybe"), "verdict"),
    ("nan-margin", dict(margins={"U4": float("nan")}), "margins"),
    ("text-margin", dict(margins={"U4": "0.1 V"}), "margins"),
    ("bad-design-hash", dict(design_sha256="abc"), "design_sha256"),
    ("bad-input-hash", dict(inputs_sha256={"cap.csv": "xyz"}), "inputs_sha256"),
    ("bad-time", dict(time="yesterday"), "ISO 8601"),
    ("not-json-worst", dict(worst={"value": object()}), "JSON"),
]


@pytest.mark.parametrize("change,needle", [b[1:] for b in BAD_RECORDS], ids=[b[0] for b in BAD_RECORDS])
def test_invalid_records_are_refused_and_nothing_is_written(tmp_path, change, needle):
    log = tmp_path / "bench.log"
    with pytest.raises(ArgumentError, match=needle):
        r = rec(**{k: v for k, v in change.items() if k != "worst"})
        if "worst" in change:
            r["worst"] = change["worst"]
        append_record(log, r)
    assert not log.exists() or log.read_bytes() == b""


def test_a_torn_tail_written_by_hand_is_reported_and_the_next_record_stays_whole(tmp_path):
    log = tmp_path / "bench.log"
    append_record(log, rec("SN-1"))
    append_record(log, rec("SN-2"))
    with open(log, "ab") as fh:
        fh.write(b'{"schema":"busbudget.record/1","time":"2026-')   # another program died here
    back = read_records(log)
    assert [r["serial"] for r in back.records] == ["SN-1", "SN-2"]
    assert back.torn_tail is not None and back.torn_tail.line == 3
    append_record(log, rec("SN-3"))
    back = read_records(log)
    assert [r["serial"] for r in back.records] == ["SN-1", "SN-2", "SN-3"]
    assert back.torn_tail is None
    assert [(p.line, p.kind) for p in back.problems] == [(3, "not JSON")]
    assert back.lines == [1, 2, 4]


def test_corrupt_and_foreign_lines_are_reported_by_line(tmp_path):
    log = tmp_path / "bench.log"
    append_record(log, rec("SN-1"))
    with open(log, "ab") as fh:
        fh.write(b"\xff\xfe garbage\n")
        fh.write(b'{"schema": "other/1"}\n')
        fh.write(b"\n")
    append_record(log, rec("SN-2"))
    back = read_records(log)
    assert [r["serial"] for r in back.records] == ["SN-1", "SN-2"]
    assert [(p.line, p.kind) for p in back.problems] == [(2, "not JSON"), (3, "not a record")]


def test_record_from_a_check_report(tmp_path):
    import budget

    design_path = budget.example_path("short-bus")
    doc = budget.check(budget.load(design_path)).to_json()
    values = tmp_path / "unit.toml"
    values.write_text('"lines.route.z0" = "47 ohm"\n')
    r = records.record_from_report(doc, serial="SN-77", command="check", design_path=design_path,
                                   input_files=[values], settings=["termination.0.r=22 ohm"])
    assert r["verdict"] == doc["verdict"] and r["worst"] == doc["worst"]
    assert r["design_sha256"] == records.sha256_bytes(Path(design_path).read_bytes())
    assert set(r["inputs_sha256"]) == {str(values), "--set"}
    want = {}
    for row in doc["results"]:
        m = row["margin_high"] if row["margin_high"] is not None else row["margin_low"]
        want[row["receiver"]] = min(want.get(row["receiver"], m), m)
    assert r["margins"] == want and set(want) == {"MEM1", "MEM2", "MEM3"}
    append_record(tmp_path / "bench.log", r)
    assert read_records(tmp_path / "bench.log").records == [r]


# -- faults: a full disk, a short write ------------------------------------------------

def _fake_write(mode):
    real = os.write

    def fake(fd, data):
        half = len(data) // 2
        real(fd, data[:half])            # the device took part of the line ...
        if mode == "enospc":
            raise OSError(errno.ENOSPC, "No space left on device")
        return half                     # ... or reported a short write
    return fake


@pytest.mark.parametrize("mode", ["enospc", "short"])
def test_a_failed_write_leaves_the_log_exactly_as_it_was(tmp_path, monkeypatch, mode):
    log = tmp_path / "bench.log"
    append_record(log, rec("SN-1"))
    before = log.read_bytes()
    monkeypatch.setattr(records.os, "write", _fake_write(mode))
    with pytest.raises(RecordError, match="disk is full" if mode == "enospc" else "short write") as info:
        append_record(log, rec("SN-2"))
    monkeypatch.undo()
    assert isinstance(info.value, BusBudgetError) and "SN-2" in str(info.value)
    assert log.read_bytes() == before
    append_record(log, rec("SN-3"))
    assert [r["serial"] for r in read_records(log).records] == ["SN-1", "SN-3"]


_FILL_DISK = textwrap.dedent("""
    import json, sys
    from budget.errors import RecordError
    from budget.records import append_record, make_record, read_records
    log = sys.argv[1] + "/bench.log"
    n = 0
    while True:
        try:
            append_record(log, make_record(serial=f"SN-{n:05d}", command="check", verdict="pass",
                                           margins={f"U{k}": 0.1 * k for k in range(20)}))
        except RecordError as exc:
            error = str(exc)
            break
        n += 1
    # a smaller record may still fit: try once more, then read everything back
    back = read_records(log)
    raw = open(log, "rb").read()
    print(json.dumps({"written": n, "error": error, "read": len(back.records),
                      "serials": [r["serial"] for r in back.records],
                      "problems": [str(p) for p in back.problems], "ends_nl": raw.endswith(b"\\n")}))
""")


def test_a_real_full_disk_on_a_tiny_tmpfs(tmp_path):
    """A 64 KiB tmpfs in a private mount namespace (skipped where mounting is not permitted)."""
    if shutil.which("unshare") is None:
        pytest.skip("unshare not available")
    mnt = tmp_path / "tiny"
    mnt.mkdir()
    script = tmp_path / "fill.py"
    script.write_text(_FILL_DISK)
    probe = subprocess.run(["unshare", "-m", "sh", "-c", f"mount -t tmpfs -o size=64k tmpfs {mnt}"],
                           capture_output=True)
    if probe.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {probe.stderr.decode().strip()}")
    out = subprocess.run(["unshare", "-m", "sh", "-c",
                          f"mount -t tmpfs -o size=64k tmpfs {mnt} && exec {sys.executable} {script} {mnt}"],
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    res = json.loads(out.stdout)
    assert res["written"] > 20                      # the disk did take records before it filled
    assert "disk is full" in res["error"] or "short write" in res["error"]
    assert res["read"] == res["written"]            # every acknowledged record is there ...
    assert res["serials"] == [f"SN-{i:05d}" for i in range(res["written"])]
    assert res["problems"] == [] and res["ends_nl"]  # ... and nothing torn


# -- concurrency and kill -9 ------------------------------------------------------------

_WRITER = textwrap.dedent("""
    import sys
    from budget.records import append_record, make_record
    log, who, count = sys.argv[1], sys.argv[2], int(sys.argv[3])
    for i in range(count):
        append_record(log, make_record(serial=f"{who}-{i:06d}", command="check", verdict="pass",
                                       margins={"U4": i * 1e-3}, worst={"writer": who, "i": i, "pad": "x" * (i % 300)}))
""")


def _writers(tmp_path, n, count, stderr=subprocess.PIPE):
    script = tmp_path / "writer.py"
    script.write_text(_WRITER)
    log = tmp_path / "bench.log"
    return log, [subprocess.Popen([sys.executable, str(script), str(log), f"W{k}", str(count)],
                                  stderr=stderr) for k in range(n)]


def test_eight_concurrent_writers_lose_and_tear_nothing(tmp_path):
    log, procs = _writers(tmp_path, 8, 200)
    for p in procs:
        _, err = p.communicate(timeout=120)
        assert p.returncode == 0, err.decode()
    back = read_records(log)
    assert back.problems == []
    assert len(back.records) == 8 * 200
    for k in range(8):
        mine = [r["serial"] for r in back.records if r["serial"].startswith(f"W{k}-")]
        assert mine == [f"W{k}-{i:06d}" for i in range(200)]   # all there, in each writer's order


def test_writers_killed_mid_run_leave_only_whole_lines(tmp_path):
    log = tmp_path / "bench.log"
    for round_ in range(3):
        _, procs = _writers(tmp_path, 2, 10**6, stderr=subprocess.DEVNULL)
        t0 = time.monotonic()
        while (not log.exists() or log.stat().st_size < (round_ + 1) * 20_000) and time.monotonic() - t0 < 60:
            time.sleep(0.01)
        grew = log.exists() and log.stat().st_size >= (round_ + 1) * 20_000
        for p in procs:
            p.send_signal(signal.SIGKILL)
        for p in procs:
            p.wait(timeout=30)
            assert p.returncode == -signal.SIGKILL
        assert grew, "the writers of this round never got the lock (a killed writer kept it?)"
        back = read_records(log)
        assert back.problems == [], back.problems
        assert log.read_bytes().endswith(b"\n")
    # nothing lost before the kill: each writer's serials of one round are consecutive
    runs = {}
    for r in back.records:
        runs.setdefault(r["serial"].split("-")[0], []).append(int(r["serial"].split("-")[1]))
    assert len(back.records) > 100
    for seq in runs.values():
        starts = [i for i, s in enumerate(seq) if s == 0]
        for a, b in zip(starts, starts[1:] + [len(seq)]):
            assert seq[a:b] == list(range(b - a))


# -- the `log` command ------------------------------------------------------------------

def test_log_command_prints_table_and_json_and_warns_of_damage(tmp_path, capsys):
    log = tmp_path / "bench.log"
    append_record(log, rec("SN-0001"))
    append_record(log, rec("SN-0002", verdict="fail", worst={"driver": "U1", "receiver": "U5", "edge": "fall",
                                                              "corner": "corner 3", "value": -0.05}))
    with open(log, "ab") as fh:
        fh.write(b'{"schema":"busbu')
    assert main(["log", str(log)]) == 0
    out, err = capsys.readouterr()
    lines = out.splitlines()
    assert lines[0].split() == ["time", "serial", "command", "verdict", "worst"]
    assert "SN-0001" in lines[1] and "PASS" in lines[1] and "U1->U4 rise nominal margin_high +0.412 V" in lines[1]
    assert "SN-0002" in lines[2] and "FAIL" in lines[2] and "-0.050 V" in lines[2]
    assert "2 record(s)" in out and "line 3: torn tail" in out
    assert "line 3: torn tail" in err
    assert main(["log", str(log), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["schema"] == "busbudget.log/1"
    assert [r["serial"] for r in doc["records"]] == ["SN-0001", "SN-0002"]
    assert doc["problems"] == [{"line": 3, "kind": "torn tail", "text": '{"schema":"busbu'}]


def test_log_command_missing_file_is_bad_input(tmp_path, capsys):
    assert main(["log", str(tmp_path / "none.log")]) == 2
    assert "none.log" in capsys.readouterr().err


from hypothesis import given, strategies as st  # noqa: E402


@given(serial=st.text(st.characters(min_codepoint=32, blacklist_categories=("Cs",)), min_size=1, max_size=40)
       .filter(lambda s: s.strip() and "\x7f" not in s),
       margins=st.dictionaries(st.text(min_size=1, max_size=8),
                               st.one_of(st.none(), st.floats(-10, 10, allow_nan=False)), max_size=5))
def test_any_serial_and_margins_round_trip_as_one_line(tmp_path_factory, serial, margins):
    log = tmp_path_factory.mktemp("log") / "bench.log"
    r = append_record(log, rec(serial, margins=margins))
    raw = log.read_bytes()
    assert raw.count(b"\n") == 1 and raw.endswith(b"\n")   # one line whatever the text holds
    back = read_records(log)
    assert back.records == [r] and back.problems == []
