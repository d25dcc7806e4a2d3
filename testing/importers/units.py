"""Units a logger column may be in, and the factor that turns each into the stored unit.

Stored units: time in minutes, displacements in millimetres, force in newtons (or proving-ring
divisions, kept raw so the stage's calibration turns them into force).
"""

from __future__ import annotations

from typing import Final

# 1 in = 25.4 mm exactly (international inch, 1959); 1 lbf = 4.4482216152605 N exactly
# (avoirdupois pound × standard gravity 9.80665 m/s²) — NIST SP 811, Appendix B.
LENGTH_TO_MM: Final = {"mm": 1.0, "in": 25.4}
TIME_TO_MIN: Final = {"s": 1.0 / 60.0, "min": 1.0, "h": 60.0}
FORCE_TO_N: Final = {"N": 1.0, "kN": 1000.0, "lbf": 4.4482216152605}
DIVISIONS: Final = "div"
FORCE_UNITS: Final = (*FORCE_TO_N, DIVISIONS)

QUANTITY_UNITS: Final[dict[str, tuple[str, ...]]] = {
    "time": tuple(TIME_TO_MIN),
    "horizontal": tuple(LENGTH_TO_MM),
    "vertical": tuple(LENGTH_TO_MM),
    "force": FORCE_UNITS,
}


def factor(quantity: str, unit: str) -> float:
    """Multiplier from ``unit`` to the stored unit of ``quantity`` (1 for raw divisions)."""
    if quantity == "time":
        return TIME_TO_MIN[unit]
    if quantity in ("horizontal", "vertical"):
        return LENGTH_TO_MM[unit]
    if quantity == "force":
        return 1.0 if unit == DIVISIONS else FORCE_TO_N[unit]
    raise KeyError(quantity)
