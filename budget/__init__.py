"""busbudget: reflection budgets and worst-case noise margins of multi-drop buses.

Quick start::

    import budget
    design = budget.load("bus.toml")            # or budget.example("backplane")
    w = budget.simulate(design, driver="U1", edge="rise")
    w["U4"]                                      # die-node voltage [V] at tap U4
    report = budget.check(design, corners=True)  # every driver x receiver x edge
    report.passed, report.worst, report.text(), report.to_json()

All quantities are SI (volts, seconds, ohms...).  Results are engineering
estimates from a linear model: confirm them by measurement and with the part
makers' data (see README, "What the model assumes").
"""
from .check import CheckReport, check
from .design_file import load, loads
from .errors import ArgumentError, BusBudgetError, DesignError, SimulationError
from .examples import example, example_path, EXAMPLES
from .model import Design
from .simulate import Waveforms, simulate

__version__ = "0.1.0"

__all__ = [
    "load", "loads", "simulate", "check", "CheckReport", "Waveforms", "Design", "example", "example_path", "EXAMPLES",
    "BusBudgetError", "DesignError", "ArgumentError", "SimulationError", "__version__",
]
