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
