"""Populations, strata and minimum samples of the audit (pure data, each value with its source).

Population of an observation: ``adult`` (age >= the adult threshold), ``paediatric``,
``unknown_age`` (no age: its own group, never counted as adult), or ``all`` for mammography
(which has no adult/paediatric split).

Stratum (``audit_medians.stratum``): paediatric head examinations by age band, paediatric
body examinations and radiographs by weight band, as the European guidelines on diagnostic
reference levels for paediatric imaging (European Commission, Radiation Protection No. 185,
2018) and ICRP Publication 135 (2017) recommend; mammography by compressed-breast-thickness
band (10 mm by default). Adults have no stratum (NULL). The band edges below are the ones
those documents give, **as recalled from memory** (the report tables were not retrieved during
development; the same edges are listed in the project's shared reference notes).
"""

from __future__ import annotations

import math

__all__ = ["AGE_BANDS_HEAD", "MIN_SAMPLE", "WEIGHT_BANDS_BODY", "stratum_bands", "stratum_basis"]

_BANDS_SOURCE = ("EC Radiation Protection No. 185 (2018) and ICRP Publication 135 (2017) "
                 "paediatric bands (from memory)")

# (label, lower bound inclusive, upper bound exclusive) in years
AGE_BANDS_HEAD = (
    ("age 0-<3 months", 0.0, 0.25),
    ("age 3 months-<1 year", 0.25, 1.0),
    ("age 1-<6 years", 1.0, 6.0),
    ("age >=6 years", 6.0, math.inf),    # up to the adult threshold
)
# (label, lower bound inclusive, upper bound exclusive) in kg
WEIGHT_BANDS_BODY = (
    ("weight <5 kg", 0.0, 5.0),
    ("weight 5-<15 kg", 5.0, 15.0),
    ("weight 15-<30 kg", 15.0, 30.0),
    ("weight 30-<50 kg", 30.0, 50.0),
    ("weight 50-<80 kg", 50.0, 80.0),
    ("weight >=80 kg", 80.0, math.inf),  # beyond the published bands: its own group
)

# Minimum number of exams in an audit group before its median is compared (per modality).
# (value, source) - ICRP 135 asks for "a reasonable number" of patients per room; the numbers
# below are our recollection of common national-survey practice.
MIN_SAMPLE = {
    "CT": (20, "ICRP 135: at least 20 patients per room for CT (from memory)"),
    "DX": (20, "ICRP 135: at least 20 patients per room for radiography (from memory)"),
    "CR": (20, "ICRP 135: at least 20 patients per room for radiography (from memory)"),
    "RF": (20, "ICRP 135: at least 20 patients per room for fluoroscopy (from memory)"),
    "XA": (20, "ICRP 135: at least 20 patients per room for interventional work (from memory)"),
    "MG": (50, "ICRP 135: at least 50 patients per room for mammography (from memory)"),
}


def stratum_basis(exam_type: str, modality: str) -> str:
    """'thickness' (mammography), 'age' (paediatric head CT), else 'weight'."""
    from .exams import EXAM_TYPES

    if modality == "MG":
        return "thickness"
    exam = EXAM_TYPES.get(exam_type)
    return "age" if exam is not None and exam.region == "head" else "weight"


def stratum_bands(thickness_band_mm: float = 10.0, max_thickness_mm: float = 150.0) -> list[dict]:
    """Rows (basis, stratum, low, high, source) of every band; `high` None means no upper edge.

    Thickness bands run 0..`max_thickness_mm` in steps of `thickness_band_mm` (the 10 mm
    default is common practice, no source; UK mammography levels use the 50-60 mm band).
    """
    rows = [{"basis": "age", "stratum": label, "low": lo, "high": None if math.isinf(hi) else hi,
             "source": _BANDS_SOURCE} for label, lo, hi in AGE_BANDS_HEAD]
    rows += [{"basis": "weight", "stratum": label, "low": lo, "high": None if math.isinf(hi) else hi,
              "source": _BANDS_SOURCE} for label, lo, hi in WEIGHT_BANDS_BODY]
    if not thickness_band_mm > 0:
        raise ValueError(f"thickness band must be > 0 mm, not {thickness_band_mm!r}")
    low = 0.0
    while low < max_thickness_mm:
        high = low + thickness_band_mm
        rows.append({"basis": "thickness", "stratum": f"thickness {low:g}-<{high:g} mm",
                     "low": low, "high": high,
                     "source": f"{thickness_band_mm:g} mm compressed-breast-thickness bands "
                               f"(common practice, no source)"})
        low = high
    return rows
