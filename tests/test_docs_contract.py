"""The docs/ folder against the code: what the reference pages promise is what the code does.

- docs/design-file.md lists every key the loader accepts, and only those; each listed key,
  written with its documented example value into the documented example design, loads;
  each key listed as required is refused when absent; undocumented keys are refused.
- docs/metrics.md documents every key the `check --json` document contains.
- docs/cli.md documents every command and option of the `busbudget` parser.
- every "docs/references.md Xn" cited in the repository names an item of docs/references.md.
"""
from __future__ import annotations

import copy
import json
import re
import tomllib
from pathlib import Path

import pytest

import budget
from budget.design_file import accepted_keys, loads
from budget.errors import DesignError

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
TOP = "(top level)"


# ---------------------------------------------------------------------------
# reading the reference tables

def _cells(line: str) -> list[str]:
    return [c.strip() for c in line.strip().strip("|").split("|")]


def marked_tables(text: str, marker: str) -> dict[str, list[dict]]:
    """Tables that follow a ``<!-- MARKER: LABEL -->`` line: label -> rows as {header: cell}."""
    out: dict[str, list[dict]] = {}
    lines = text.splitlines()
    pat = re.compile(rf"<!--\s*{marker}:\s*(.*?)\s*-->")
    for i, line in enumerate(lines):
        m = pat.match(line.strip())
        if not m:
            continue
        label = m.group(1)
        j = i + 1
        while j < len(lines) and not lines[j].strip():
            j += 1
        header = _cells(lines[j])
        rows = []
        j += 2                                      # header and |---| separator
        while j < len(lines) and lines[j].strip().startswith("|"):
            rows.append(dict(zip(header, _cells(lines[j]))))
            j += 1
        assert label not in out, f"two tables marked {marker}: {label}"
        out[label] = rows
    return out


def unquote(cell: str) -> str:
    m = re.fullmatch(r"`([^`]+)`", cell)
    assert m, f"first column must be a key in backticks, got {cell!r}"
    return m.group(1)


DESIGN_DOC = (DOCS / "design-file.md").read_text(encoding="utf-8")
KEY_TABLES = marked_tables(DESIGN_DOC, "keys")
DOCUMENTED = {("" if label == TOP else label): {unquote(r["key"]): r for r in rows}
              for label, rows in KEY_TABLES.items()}


def example_design() -> dict:
    """The example design of docs/design-file.md (its first toml block), as a dict."""
    m = re.search(r"```toml\n(.*?)```", DESIGN_DOC, re.S)
    return tomllib.loads(m.group(1))


def example_value(row: dict):
    """A documented example cell (TOML value in backticks) as a Python value."""
    return tomllib.loads(f"x = {unquote(row['example'])}")["x"]


def to_toml(doc: dict) -> str:
    """A design dict as TOML text (top-level keys with inline values; tomllib reads it back equal)."""
    def val(x):
        if isinstance(x, bool):
            return "true" if x else "false"
        if isinstance(x, (int, float)):
            return repr(x)
        if isinstance(x, str):
            return json.dumps(x)
        if isinstance(x, list):
            return "[" + ", ".join(val(v) for v in x) + "]"
        if isinstance(x, dict):
            return "{" + ", ".join(f"{json.dumps(k)} = {val(v)}" for k, v in x.items()) + "}"
        raise TypeError(x)
    return "\n".join(f"{json.dumps(k)} = {val(v)}" for k, v in doc.items()) + "\n"


# where each label's table sits in the example design, and the entry a test edits there
PART_OF_ROLE = {"parts.driver": "ctrl", "parts.receiver": "rx", "parts.transceiver": "xcvr"}


def entry(doc: dict, label: str) -> dict:
    """The table of ``doc`` that holds the keys of ``label`` (created from documented examples if needed)."""
    if label in ("bus", "edge"):
        return doc[label]
    if label in PART_OF_ROLE:
        return doc["parts"][PART_OF_ROLE[label]]
    if label == "parts.ibis_part":   # a part from the shipped IBIS file (paths relative to the repository root)
        return doc["parts"].setdefault("ibis_x", {"ibis": {"file": "budget/examples/ibis/tansy_tsx33.ibs",
                                                           "model": "tsx33_io"}})
    if label == "parts.ibis":
        return entry(doc, "parts.ibis_part")["ibis"]
    if label == "parts.ref_load":
        return doc["parts"]["ctrl"].setdefault("ref_load", required_entry("parts.ref_load"))
    if label == "lines":
        return doc["lines"]["trunk"]
    if label.startswith("lines.geometry."):      # the trunk given by its cross-section instead
        trunk = doc["lines"]["trunk"]
        for k in ("z0", "delay", "er_eff"):
            trunk.pop(k, None)
        if "coupled" in label:                    # a pair: only differential designs take it
            doc["bus"]["signaling"] = "differential"
        trunk["geometry"] = required_entry(label)
        return trunk["geometry"]
    if label == "segment":
        return doc["segment"][0]
    if label == "tap":
        return doc["tap"][1]
    if label == "tap.stub":
        return doc["tap"][1]["stub"]
    if label.startswith("termination."):
        doc["termination"] = [required_entry(label)]
        return doc["termination"][0]
    if label == "budget":
        return doc.setdefault("budget", {})
    raise AssertionError(f"no place in the example design for label {label!r}")


def required_entry(label: str) -> dict:
    """An entry holding the required keys of ``label`` with their documented example values."""
    return {k: example_value(r) for k, r in DOCUMENTED[label].items() if r["required"].startswith("yes")}


def alternatives(row: dict) -> list[str]:
    """Keys named by a required cell 'one of `a`/`b`'."""
    return re.findall(r"`([^`]+)`", row["required"]) if row["required"].startswith("one of") else []


@pytest.fixture(autouse=True)
def _at_repository_root(monkeypatch):
    """The documented IBIS example path is relative to the repository root."""
    monkeypatch.chdir(ROOT)


KEYED = [(label, key) for label in sorted(DOCUMENTED) if label for key in sorted(DOCUMENTED[label])]


# ---------------------------------------------------------------------------
# design-file reference

def test_reference_lists_exactly_the_accepted_keys():
    accepted = accepted_keys()
    assert set(DOCUMENTED) == set(accepted), "table labels differ between docs/design-file.md and accepted_keys()"
    for label, keys in accepted.items():
        documented = set(DOCUMENTED[label])
        assert keys - documented == set(), f"[{label or TOP}] accepted but not documented"
        assert documented - keys == set(), f"[{label or TOP}] documented but not accepted"


def test_reference_rows_are_complete():
    for label, rows in DOCUMENTED.items():
        for key, row in rows.items():
            for column in ("unit", "required", "when absent", "meaning", "example"):
                assert row.get(column), f"[{label or TOP}] {key}: empty {column!r} column"
            assert re.match(r"(yes|no|one of)", row["required"]), f"[{label}] {key}: required column"


def test_example_design_of_the_reference_loads():
    d = loads(to_toml(example_design()), source="design-file.md")
    assert d.bus.name == "docs example bus" and d.tap_names == ("U1", "U2", "U3")


@pytest.mark.parametrize("label,key", KEYED, ids=[f"{lb}:{k}" for lb, k in KEYED])
def test_each_documented_key_loads_with_its_example(label, key):
    doc = example_design()
    row = DOCUMENTED[label][key]
    table = entry(doc, label)
    for other in alternatives(row):
        table.pop(other, None)
    table[key] = example_value(row)
    loads(to_toml(doc), source=f"docs example with {label}.{key}")


REQUIRED = [(label, key) for label, key in KEYED if not DOCUMENTED[label][key]["required"].startswith("no")]


@pytest.mark.parametrize("label,key", REQUIRED, ids=[f"{lb}:{k}" for lb, k in REQUIRED])
def test_each_required_key_is_refused_when_absent(label, key):
    doc = example_design()
    table = entry(doc, label)
    for other in alternatives(DOCUMENTED[label][key]):
        table.pop(other, None)
    table.pop(key, None)
    with pytest.raises(DesignError) as err:
        loads(to_toml(doc), source="missing.toml")
    assert "missing.toml" in str(err.value)
    if key not in ("type", "role"):     # without its kind the table cannot be named by kind
        assert key in str(err.value) or any(a in str(err.value) for a in alternatives(DOCUMENTED[label][key]))


@pytest.mark.parametrize("name,required", [(unquote(r["key"]), r["required"].startswith("yes"))
                                           for r in KEY_TABLES[TOP]])
def test_top_level_tables_required_as_documented(name, required):
    doc = example_design()
    if name not in doc:
        doc[name] = {} if name in ("tolerances", "budget") else []
        loads(to_toml(doc), source="with.toml")     # an empty optional table is accepted
        return
    del doc[name]
    if name == "lines":                          # segments and stubs need their line types
        doc.pop("segment")
        doc["tap"] = [{k: v for k, v in t.items() if k != "stub"} | {"node": "n0"} for t in doc["tap"]]
        doc["termination"][0]["node"] = "n0"
    elif name == "segment":
        doc["tap"] = [t | {"node": "n0"} for t in doc["tap"]]
        doc["termination"][0]["node"] = "n0"
    if required:
        with pytest.raises(DesignError, match=name):
            loads(to_toml(doc), source="without.toml")
    else:
        loads(to_toml(doc), source="without.toml")


ALL_KEYS = sorted({k for rows in DOCUMENTED.values() for k in rows}
                  | {k for keys in accepted_keys().values() for k in keys} | {"not_a_documented_key"})


def _value_for(key: str):
    """A plausible value for ``key``: its documented example in some table, else a number."""
    for label, rows in DOCUMENTED.items():
        if label and key in rows:
            return example_value(rows[key])
    return 1.0


@pytest.mark.parametrize("label", sorted(lb for lb in DOCUMENTED if lb))
def test_undocumented_keys_are_refused(label):
    """Every key known anywhere (documented or accepted in any table) but not documented for
    ``label`` is refused there by the real loader, naming that key."""
    accepted_anyway = []
    for key in ALL_KEYS:
        if key in DOCUMENTED[label]:
            continue
        doc = example_design()
        entry(doc, label)[key] = _value_for(key)
        try:
            loads(to_toml(doc), source="undocumented.toml")
        except DesignError as exc:
            assert exc.key == key, f"[{label}] {key}: refused for another reason: {exc}"
        else:
            accepted_anyway.append(key)
    assert accepted_anyway == [], f"[{label}] the loader accepts undocumented keys"


def test_undocumented_top_level_table_is_refused():
    doc = example_design()
    doc["not_a_documented_table"] = {}
    with pytest.raises(DesignError, match="not_a_documented_table"):
        loads(to_toml(doc), source="undocumented.toml")


# ---------------------------------------------------------------------------
# metric and JSON contract

METRICS_DOC = (DOCS / "metrics.md").read_text(encoding="utf-8")
JSON_ROWS = {unquote(r["key"]): r for r in marked_tables(METRICS_DOC, "json")["busbudget.check/1"]}
# objects whose keys are names from the design, not schema keys: path -> placeholder
DATA_MAPS = {"tolerances": "PATH", "budget.allocations": "NAME", "variants": "LABEL",
             "variants.LABEL.values": "PATH", "variants.LABEL.extremes": "PATH", "extensions": "KEY"}


def json_leaves(x, prefix="", out=None) -> dict:
    """Schema path -> list of values for every leaf of a JSON document (lists of objects as ``[]``)."""
    out = {} if out is None else out
    if isinstance(x, dict):
        for k, v in x.items():
            name = DATA_MAPS.get(prefix, k)
            json_leaves(v, f"{prefix}.{name}" if prefix else name, out)
    elif isinstance(x, list) and x and all(isinstance(v, dict) for v in x):
        for v in x:
            json_leaves(v, prefix + "[]", out)
    else:
        out.setdefault(prefix, []).append(x)
    return out


@pytest.fixture(scope="module")
def check_documents():
    """JSON documents of `check` on bundled and test designs, every analysis exercised."""
    from budget.check import check

    designs = ROOT / "tests" / "designs"
    reports = [
        check(budget.example("short-bus"), corners=True, monte_carlo=8, seed=1, search=True,
              search_generations=1),
        check(budget.example("fieldbus")),
        check(budget.load(designs / "failing_overshoot.toml")),
        check(budget.load(designs / "dc_limited.toml")),       # fails on its DC level alone: anatomy.dc_remedies
    ]
    return [json.loads(json.dumps(r.to_json(), allow_nan=False)) for r in reports]


def test_every_emitted_json_key_is_documented(check_documents):
    leaves = {}
    for doc in check_documents:
        for path, values in json_leaves(doc).items():
            leaves.setdefault(path, []).extend(values)
    undocumented = sorted(set(leaves) - set(JSON_ROWS))
    assert undocumented == [], "keys of the check JSON missing from docs/metrics.md"
    never_emitted = sorted(set(JSON_ROWS) - set(leaves))
    assert never_emitted == [], "keys documented in docs/metrics.md that check no longer emits"
    for path, row in JSON_ROWS.items():
        if row["null"] == "never":
            assert None not in leaves[path], f"{path} is documented as never null"


def test_documented_violation_names_are_the_kernels():
    """The violation table of docs/metrics.md names the kernel's violations, in the kernel's order."""
    from budget.kernels.metrics import VIOLATION_NAMES

    documented = re.findall(r"^\| `([^`]+)` \| (?:the margin|t_valid|v_peak|v_trough|monotonic|settle_time)",
                            METRICS_DOC, re.M)
    assert documented == [name for _, name in VIOLATION_NAMES]


# ---------------------------------------------------------------------------
# command-line contract

CLI_DOC = (DOCS / "cli.md").read_text(encoding="utf-8")


def parser_options() -> dict[str, set[str]]:
    """Command -> its option strings and positional names, from the real argparse parser."""
    import argparse

    from budget.cli import build_parser

    def names(p):
        out = set()
        for a in p._actions:
            if isinstance(a, argparse._SubParsersAction):
                continue
            out |= set(a.option_strings) if a.option_strings else {a.dest}
        return out

    def walk(p, prefix):
        for action in p._actions:
            if isinstance(action, argparse._SubParsersAction):
                for name, sub in action.choices.items():
                    out[prefix + name] = names(sub)
                    walk(sub, prefix + name + " ")     # nested commands: "solve stub"

    parser = build_parser()
    out = {TOP: names(parser)}
    walk(parser, "")
    return out


def test_cli_reference_lists_every_command_and_option():
    documented = {label: {o for r in rows for o in re.findall(r"`([^`]+)`", r["option"])}
                  for label, rows in marked_tables(CLI_DOC, "options").items()}
    actual = parser_options()
    assert set(documented) == set(actual), "commands in docs/cli.md differ from the parser's"
    for command, options in actual.items():
        assert options - documented[command] == set(), f"{command}: options missing from docs/cli.md"
        assert documented[command] - options == set(), f"{command}: docs/cli.md lists options the parser lacks"
        if command != TOP:
            assert f"## `busbudget {command}" in CLI_DOC


def test_cli_reference_documents_the_exit_codes():
    from budget import cli

    rows = {r["code"]: r["meaning"] for r in
            [dict(zip(["code", "meaning"], _cells(line))) for line in CLI_DOC.splitlines()
             if re.match(r"\| \d+ \|", line)]}
    for code in (cli.EXIT_PASS, cli.EXIT_FAIL, cli.EXIT_INPUT, 3, 130):
        assert str(code) in rows, f"exit code {code} not documented"


# ---------------------------------------------------------------------------
# citations of the reference list

REFERENCES_DOC = (DOCS / "references.md").read_text(encoding="utf-8")
CITATION = re.compile(r"docs/references\.md (?:(section) )?([A-G]\d*)\b")


def repository_text_files():
    """Source, test, benchmark, C and documentation files of the repository."""
    for folder in ("budget", "tests", "benchmarks", "cexport", "docs"):
        for path in sorted((ROOT / folder).rglob("*")):
            if path.suffix in (".py", ".toml", ".md", ".c", ".h", ".txt") and path.is_file():
                yield path
    yield from sorted(ROOT.glob("*.md"))


def test_reference_items_are_unique_and_in_order():
    items = re.findall(r"^### ([A-G]\d+)\. ", REFERENCES_DOC, re.M)
    assert len(items) == len(set(items))
    expected = {"A": 11, "B": 9, "C": 5, "D": 5, "E": 9, "F": 3, "G": 3}
    assert items == [f"{g}{i}" for g, n in expected.items() for i in range(1, n + 1)]


def test_every_cited_reference_item_exists():
    items = set(re.findall(r"^### ([A-G]\d+)\. ", REFERENCES_DOC, re.M))
    sections = set(re.findall(r"^## ([A-G])\. ", REFERENCES_DOC, re.M))
    cited = 0
    for path in repository_text_files():
        text = path.read_text(encoding="utf-8", errors="replace")
        for m in CITATION.finditer(text):
            cited += 1
            known = sections if m.group(1) or len(m.group(2)) == 1 else items
            where = f"{path.relative_to(ROOT)}:{text.count(chr(10), 0, m.start()) + 1}"
            assert m.group(2) in known, f"{where} cites {m.group(0)!r}, not in docs/references.md"
    assert cited > 20          # the suite really cites the list (guards against a broken pattern)


def test_no_citation_of_documents_outside_the_repository():
    stale = re.compile(r"REFERENCES [A-G]\d|REFERENCES\.md|DESIGN\.md")
    for path in repository_text_files():
        if path.name == Path(__file__).name:
            continue
        text = path.read_text(encoding="utf-8", errors="replace")
        assert not stale.search(text), f"{path.relative_to(ROOT)} cites a document outside the repository"
