"""Example designs shipped with the package (fictional boards and parts, for demos)."""
from __future__ import annotations

from importlib import resources
from pathlib import Path

EXAMPLES = {
    "backplane": "backplane.toml",
    "short-bus": "short_bus.toml",
    "fieldbus": "fieldbus.toml",
}


def example_path(name: str) -> Path:
    """Path of the bundled example design ``name`` (one of :data:`EXAMPLES`)."""
    if name not in EXAMPLES:
        from ..errors import ArgumentError
        raise ArgumentError(f"unknown example {name!r}; examples: {', '.join(EXAMPLES)}")
    return Path(str(resources.files(__name__).joinpath(EXAMPLES[name])))


def example(name: str):
    """Load the bundled example design ``name``."""
    from ..design_file import load

    return load(example_path(name))


CAPTURES = ("wren_unit0042_rise.csv", "wren_unit0042_fall.csv", "wren_unit0117_rise.csv", "wren_trunk_tdr.csv",
            "wren_unit0042_values.toml", "wren_unit0117_values.csv")


def captures_dir() -> Path:
    """Directory of the demo captures, values files and TDR trace of the fictional Wren board (README.md there)."""
    return Path(str(resources.files(__name__).joinpath("captures")))


def capture_path(name: str) -> Path:
    """Path of the demo file ``name`` (one of :data:`CAPTURES`)."""
    if name not in CAPTURES:
        from ..errors import ArgumentError
        raise ArgumentError(f"unknown demo capture {name!r}; files: {', '.join(CAPTURES)}")
    return captures_dir() / name
