"""Which taps can drive: the one check behind every command that names a driver."""
from __future__ import annotations

from .errors import ArgumentError
from .limits import listed


def driving_part(design, driver: str):
    """The part of tap ``driver`` if it can drive; ArgumentError naming the tap, its role and the taps that can.

    An unknown tap raises the ArgumentError of :meth:`budget.Design.tap` (it lists the taps).
    """
    part = design.parts[design.tap(driver).part]
    if not part.can_drive:
        raise ArgumentError(f"tap {driver!r} cannot drive: its part {part.name!r} has role {part.role!r}; "
                            f"taps that can drive: {listed(design.drivers) or 'none'}")
    return part


__all__ = ["driving_part"]
