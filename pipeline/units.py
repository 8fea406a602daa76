"""UCUM unit codes -> one canonical unit per quantity, with exact factors.

Factors are exact SI prefixes and areas: 1 Gy.m2 = 1e4 Gy.cm2 (1 m2 = 1e4 cm2); 1 dGy.cm2 =
0.1 Gy.cm2; 1 uGy.m2 = 1 cGy.cm2 = 0.01 Gy.cm2. The unit each template row prescribes is in
PS3.16 (TID 10003/10004/10007: Gy.m2, Gy, s; TID 10013: mGy, mGy.cm, s, mm, kV, mA); other
codes a device may send are accepted only if listed here, never guessed.

Plausibility bounds are wide sanity limits per value (common practice, no source): a value
outside them is an absurd magnitude (a unit or typing error), kept as NULL with an issue.
"""

from __future__ import annotations

import math
from enum import Enum

__all__ = ["PLAUSIBLE", "Quantity", "UnitError", "convert", "canonical_unit"]


class Quantity(str, Enum):
    DAP = "Gy.cm2"
    AIR_KERMA = "mGy"
    DLP = "mGy.cm"
    TIME = "s"
    SHORT_TIME = "ms"
    LENGTH = "mm"
    AREA = "cm2"
    VOLTAGE = "kV"
    CURRENT = "mA"
    CHARGE = "mA.s"
    ANGLE = "deg"
    COUNT = "1"
    RATE = "/s"
    PERCENT = "%"


_FACTORS: dict[Quantity, dict[str, float]] = {
    Quantity.DAP: {"Gy.m2": 1e4, "Gy.cm2": 1.0, "dGy.cm2": 0.1, "cGy.cm2": 0.01,
                   "mGy.cm2": 1e-3, "uGy.cm2": 1e-6, "uGy.m2": 1e-2, "mGy.m2": 10.0,
                   "dGy.m2": 1e3, "cGy.m2": 100.0},
    Quantity.AIR_KERMA: {"Gy": 1e3, "dGy": 100.0, "cGy": 10.0, "mGy": 1.0, "uGy": 1e-3},
    Quantity.DLP: {"mGy.cm": 1.0, "Gy.cm": 1e3, "cGy.cm": 10.0, "mGy.mm": 0.1, "mGy.m": 100.0},
    Quantity.TIME: {"s": 1.0, "ms": 1e-3, "us": 1e-6, "min": 60.0, "h": 3600.0},
    Quantity.SHORT_TIME: {"ms": 1.0, "s": 1e3, "us": 1e-3},
    Quantity.LENGTH: {"mm": 1.0, "cm": 10.0, "m": 1e3, "um": 1e-3},
    Quantity.AREA: {"cm2": 1.0, "m2": 1e4, "mm2": 1e-2},
    Quantity.VOLTAGE: {"kV": 1.0, "V": 1e-3},
    Quantity.CURRENT: {"mA": 1.0, "A": 1e3, "uA": 1e-3},
    Quantity.CHARGE: {"mA.s": 1.0, "uA.s": 1e-3, "A.s": 1e3, "mAs": 1.0},
    Quantity.ANGLE: {"deg": 1.0},
    Quantity.COUNT: {"1": 1.0, "{ratio}": 1.0, "{events}": 1.0, "{X-Ray sources}": 1.0,
                     "{pulse}": 1.0, "{pulses}": 1.0, "{frames}": 1.0, "{ratio}/{ratio}": 1.0},
    Quantity.RATE: {"{pulse}/s": 1.0, "/s": 1.0, "Hz": 1.0, "{pulses}/s": 1.0, "{frames}/s": 1.0},
    Quantity.PERCENT: {"%": 1.0},
}

# (low, high) in the canonical unit; outside is an absurd magnitude. Common practice, no source.
PLAUSIBLE: dict[str, tuple[float, float]] = {
    "dap_event": (0.0, 5_000.0),            # Gy.cm2 per event
    "dap_total": (0.0, 20_000.0),           # Gy.cm2 per study
    "dose_rp_event": (0.0, 30_000.0),       # mGy
    "dose_rp_total": (0.0, 100_000.0),
    "ctdivol": (0.0, 3_000.0),              # mGy (perfusion can reach ~1000)
    "dlp_event": (0.0, 50_000.0),           # mGy.cm
    "dlp_total": (0.0, 100_000.0),
    "agd": (0.0, 100.0),                    # mGy per view
    "kvp": (15.0, 160.0),
    "time": (0.0, 86_400.0),                # s
    "xray_sources": (1.0, 16.0),            # X-ray sources of one CT (stored as an integer)
}


class UnitError(ValueError):
    """The unit code is not one we may convert for this quantity."""


def canonical_unit(quantity: Quantity) -> str:
    return quantity.value


def convert(value: float, unit: str, quantity: Quantity) -> float:
    """`value` in UCUM `unit` expressed in the canonical unit of `quantity`.

    Raises UnitError for a unit not listed for the quantity (never guesses a scale).
    """
    try:
        factor = _FACTORS[quantity][unit]
    except KeyError:
        raise UnitError(f"unit {unit!r} is not a known unit of {quantity.name.lower()} "
                        f"(canonical {quantity.value})") from None
    result = value * factor
    if math.isfinite(result) and factor != 1.0:
        result = float(f"{result:.15g}")  # drop binary noise of the scaling, keep 15 digits
    return result
