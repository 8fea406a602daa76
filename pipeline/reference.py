"""Published reference data: reference-level sets, alert thresholds, SSDE and DLP->E factors.

Every number lives in a CSV under ``queries/seeds/`` next to its source (title, year, table,
URL) and a ``verified`` flag: ``true`` only where the number was seen in a retrieved copy of
the cited source; rows marked ``false`` are recalled or secondary and are left out unless the
caller passes ``include_unverified=True``. ``queries/seeds/reference_levels/README.md`` says
what was checked where.

The functions here read and validate those files; they hold no numbers of their own except the
AAPM Report 220 formula for the water-equivalent diameter.
"""

from __future__ import annotations

import csv
import math
import re
from functools import cache
from pathlib import Path

from queries import ROOT as _QUERIES_ROOT

from .exams import EXAM_TYPES as _EXAM_TYPES

__all__ = [
    "ALERT_COLUMNS",
    "EXAM_TYPES",
    "QUANTITY_UNITS",
    "REFERENCE_LEVEL_COLUMNS",
    "SEEDS",
    "UnverifiedReferenceError",
    "effective_dose_msv",
    "load_alert_thresholds",
    "load_reference_sets",
    "ssde_conversion_factor",
    "water_equivalent_diameter_mm",
]

SEEDS = _QUERIES_ROOT / "seeds"

# effective_date is the date the set came into force (valid from); valid_to the last day it
# was in force (empty: still in force), superseded_by what replaced it. country: ISO 3166-1
# alpha-2 of the issuing body. indication: the clinical indication the row is defined for
# (empty: the source defines it by anatomy only). phantom_stated: the cited source itself
# names the CTDIvol phantom (false: the phantom is a convention recalled from memory).
REFERENCE_LEVEL_COLUMNS = (
    "set_id", "issuing_body", "country", "version", "effective_date", "valid_to",
    "superseded_by", "exam_type", "indication", "quantity", "value", "unit", "population",
    "age_min_years", "age_max_years", "weight_min_kg", "weight_max_kg", "phantom",
    "phantom_stated", "citation_title", "citation_year", "citation_table", "citation_url",
    "verified", "note",
)
ALERT_COLUMNS = ("rule", "quantity", "threshold", "unit", "basis", "source_title",
                 "source_year", "source_url", "verified", "note")
_SSDE_COLUMNS = ("phantom", "a", "b_per_cm", "d_min_cm", "d_max_cm", "diameter", "source_title",
                 "source_year", "source_table", "source_url", "verified", "note")
_K_COLUMNS = ("region", "reference_age_years", "age_min_years", "age_max_years",
              "k_msv_per_mgy_cm", "basis", "kvp", "source_title", "source_year", "source_table",
              "source_url", "verified", "note")

# The one unit each quantity is stored in (the units the audit compares in).
QUANTITY_UNITS = {
    "dlp": "mGy.cm",          # per complete examination
    "ctdivol": "mGy",         # per sequence
    "dap": "Gy.cm2",          # per examination or per radiograph, as the table says (note)
    "dose_rp": "mGy",         # reference air kerma Ka,r
    "fluoro_time": "s",
    "agd": "mGy",             # mean (average) glandular dose
    "ka_e": "mGy",            # entrance surface air kerma, with backscatter
    # image-header Entrance Dose whose derivation (0040,8303) is not ESAK (incident air kerma,
    # tissue dose, or unstated): its own quantity, compared with no Ka,e or Ka,r reference
    "entrance_dose": "mGy",
}
_ALERT_UNITS = {**QUANTITY_UNITS, "peak_skin_dose": "mGy"}

EXAM_TYPES = frozenset(_EXAM_TYPES)  # the taxonomy lives in pipeline.exams
_POPULATIONS = frozenset({"adult", "paediatric", "all"})  # all: no age split (mammography)
_COUNTRY = re.compile(r"^[A-Z]{2}$")  # ISO 3166-1 alpha-2
_PHANTOMS = frozenset({"head_16cm", "body_32cm"})
_DATE = re.compile(r"^\d{4}(-\d{2}(-\d{2})?)?$")     # the precision the source gives
_SET_ID = re.compile(r"^[a-z0-9_]+$")


class UnverifiedReferenceError(LookupError):
    """The only published value for a lookup is unverified, and unverified values are off."""


# ---------------------------------------------------------------------------- parsing helpers

class _Row:
    """One CSV row with its file and line, so that every error names both."""

    def __init__(self, path: Path, line: int, raw: dict[str, str]) -> None:
        self.path, self.line, self.raw = path, line, raw

    def fail(self, message: str) -> ValueError:
        return ValueError(f"{self.path.name} row {self.line}: {message}")

    def text(self, column: str, *, required: bool = True) -> str:
        value = (self.raw.get(column) or "").strip()
        if required and not value:
            raise self.fail(f"{column} is empty")
        return value

    def number(self, column: str, *, required: bool = True, positive: bool = False) -> float | None:
        value = self.text(column, required=required)
        if not value:
            return None
        try:
            number = float(value)
        except ValueError:
            raise self.fail(f"{column} {value!r} is not a number") from None
        if not math.isfinite(number) or number < 0 or (positive and number == 0):
            kind = "positive" if positive else "non-negative"
            raise self.fail(f"{column} {value!r} must be a finite {kind} number")
        return number

    def flag(self, column: str = "verified") -> bool:
        value = self.text(column).lower()
        if value not in ("true", "false"):
            raise self.fail(f"{column} must be true or false, not {value!r}")
        return value == "true"

    def year(self, column: str) -> int:
        value = self.text(column)
        if not re.fullmatch(r"\d{4}", value):
            raise self.fail(f"{column} {value!r} is not a four-digit year")
        return int(value)

    def url(self, column: str) -> str:
        value = self.text(column)
        if not value.startswith(("http://", "https://")):
            raise self.fail(f"{column} {value!r} is not an http(s) URL")
        return value

    def band(self, low: str, high: str) -> tuple[float | None, float | None]:
        lo, hi = self.number(low, required=False), self.number(high, required=False)
        if lo is not None and hi is not None and not lo < hi:
            raise self.fail(f"{low} {lo:g} must be below {high} {hi:g}")
        return lo, hi


def _stamp(path: Path) -> tuple[int, int]:
    stat = path.stat()
    return stat.st_mtime_ns, stat.st_size


def _rows(path: Path, columns: tuple[str, ...]) -> list[_Row]:
    """Rows of a CSV whose header must be exactly `columns`; line numbers count the header as 1."""
    with path.open(newline="", encoding="utf-8") as fh:
        reader = csv.DictReader(fh)
        header = tuple(reader.fieldnames or ())
        if header != columns:
            raise ValueError(f"{path.name} row 1: header must be exactly {','.join(columns)}; "
                             f"got {','.join(header)}")
        rows = []
        for raw in reader:
            row = _Row(path, reader.line_num, raw)
            if None in raw:
                raise row.fail("more fields than the header")
            rows.append(row)
    return rows


# ---------------------------------------------------------------------------- reference levels

def _reference_level(row: _Row) -> dict:
    quantity = row.text("quantity")
    if quantity not in QUANTITY_UNITS:
        raise row.fail(f"unknown quantity {quantity!r} (known: {', '.join(QUANTITY_UNITS)})")
    unit = row.text("unit")
    if unit != QUANTITY_UNITS[quantity]:
        raise row.fail(f"unit {unit!r} is not {QUANTITY_UNITS[quantity]!r}, the unit of {quantity}")
    exam_type = row.text("exam_type")
    if exam_type not in EXAM_TYPES:
        raise row.fail(f"unknown exam_type {exam_type!r}")
    population = row.text("population")
    if population not in _POPULATIONS:
        raise row.fail(f"population must be adult, paediatric or all, not {population!r}")
    phantom = row.text("phantom", required=False)
    if phantom and phantom not in _PHANTOMS:
        raise row.fail(f"phantom must be head_16cm, body_32cm or empty, not {phantom!r}")
    if phantom and quantity != "ctdivol":
        raise row.fail(f"phantom {phantom!r} given for {quantity}; only ctdivol rows name a phantom")
    if bool(phantom) != bool(row.text("phantom_stated", required=False)):
        raise row.fail("phantom_stated must be given (true or false) exactly when phantom is")
    effective = row.text("effective_date")
    if not _DATE.match(effective):
        raise row.fail(f"effective_date {effective!r} is not YYYY, YYYY-MM or YYYY-MM-DD")
    valid_to = row.text("valid_to", required=False)
    if valid_to and (not _DATE.match(valid_to) or valid_to < effective):
        raise row.fail(f"valid_to {valid_to!r} is not a date (YYYY[-MM[-DD]]) on or after effective_date")
    country = row.text("country")
    if not _COUNTRY.match(country):
        raise row.fail(f"country {country!r} is not an ISO 3166-1 alpha-2 code (e.g. GB, AU)")
    set_id = row.text("set_id")
    if not _SET_ID.match(set_id):
        raise row.fail(f"set_id {set_id!r} must be lower-case letters, digits and _")
    age = row.band("age_min_years", "age_max_years")
    weight = row.band("weight_min_kg", "weight_max_kg")
    return {
        "set_id": set_id,
        "issuing_body": row.text("issuing_body"),
        "country": country,
        "version": row.text("version"),
        "effective_date": effective,
        "valid_to": valid_to or None,
        "superseded_by": row.text("superseded_by", required=False) or None,
        "exam_type": exam_type,
        "indication": row.text("indication", required=False) or None,
        "quantity": quantity,
        "value": row.number("value", positive=True),
        "unit": unit,
        "population": population,
        "age_min_years": age[0], "age_max_years": age[1],
        "weight_min_kg": weight[0], "weight_max_kg": weight[1],
        "phantom": phantom or None,
        "phantom_stated": row.flag("phantom_stated") if phantom else None,
        "citation_title": row.text("citation_title"),
        "citation_year": row.year("citation_year"),
        "citation_table": row.text("citation_table"),
        "citation_url": row.url("citation_url"),
        "verified": row.flag(),
        "note": row.text("note", required=False),
    }


@cache
def _reference_file(path: Path, _stamp: tuple[int, int]) -> tuple[dict, ...]:
    """Parsed rows of one set file; cached per (path, mtime, size) so an edited file is re-read."""
    out, seen = [], {}
    for row in _rows(path, REFERENCE_LEVEL_COLUMNS):
        level = _reference_level(row)
        if level["set_id"] != path.stem:
            raise row.fail(f"set_id {level['set_id']!r} differs from the file name {path.stem!r}")
        for column in ("issuing_body", "country", "version", "effective_date", "valid_to",
                       "superseded_by"):
            if out and level[column] != out[0][column]:
                raise row.fail(f"{column} differs from row 2 of the same set")
        key = (level["exam_type"], level["quantity"], level["population"], level["age_min_years"],
               level["age_max_years"], level["weight_min_kg"], level["weight_max_kg"])
        if key in seen:
            raise row.fail(f"duplicates row {seen[key]} (same exam_type, quantity, population, bands)")
        seen[key] = row.line
        out.append(level)
    return tuple(out)


def load_reference_sets(include_unverified: bool = False, *, directory: Path | None = None) -> list[dict]:
    """Every reference level of every set in ``queries/seeds/reference_levels/*.csv``.

    Parameters
    ----------
    include_unverified : bool
        Also return rows whose value was not seen in the cited source (``verified = false``:
        recalled or secondary values). Off by default.
    directory : Path, optional
        Another folder of set files (one ``<set_id>.csv`` per set); for tests and user sets.

    Returns
    -------
    list of dict
        One dict per row, columns as in `REFERENCE_LEVEL_COLUMNS`, with ``value`` and the bands
        as float (empty band -> None), ``citation_year`` int, ``verified`` bool, empty phantom
        -> None. Files are read in name order, rows in file order.

    Raises
    ------
    ValueError
        On the first bad row, naming the file and its line (the header is row 1): wrong header,
        unknown exam type or quantity, a unit that is not the quantity's unit, a phantom on a
        non-CTDIvol row, a bad number, date, year, URL or flag, a set_id that differs from the
        file name, or two rows for the same exam, quantity, population and bands.
    """
    folder = Path(directory) if directory is not None else SEEDS / "reference_levels"
    levels = []
    for path in sorted(folder.glob("*.csv")):
        path = path.resolve()
        levels += [dict(level) for level in _reference_file(path, _stamp(path))
                   if include_unverified or level["verified"]]
    return levels


# ---------------------------------------------------------------------------- alert thresholds

@cache
def _alert_file(path: Path, _stamp: tuple[int, int]) -> tuple[dict, ...]:
    out, seen = [], set()
    for row in _rows(path, ALERT_COLUMNS):
        quantity = row.text("quantity")
        if quantity not in _ALERT_UNITS:
            raise row.fail(f"unknown quantity {quantity!r} (known: {', '.join(_ALERT_UNITS)})")
        unit = row.text("unit")
        if unit != _ALERT_UNITS[quantity]:
            raise row.fail(f"unit {unit!r} is not {_ALERT_UNITS[quantity]!r}, the unit of {quantity}")
        rule = row.text("rule")
        if rule in seen:
            raise row.fail(f"rule {rule!r} appears twice")
        seen.add(rule)
        out.append({"rule": rule, "quantity": quantity,
                    "threshold": row.number("threshold", positive=True), "unit": unit,
                    "basis": row.text("basis"), "source_title": row.text("source_title"),
                    "source_year": row.year("source_year"), "source_url": row.url("source_url"),
                    "verified": row.flag(), "note": row.text("note", required=False)})
    return tuple(out)


def load_alert_thresholds(include_unverified: bool = False, *, path: Path | None = None) -> list[dict]:
    """Follow-up and notification thresholds from ``queries/seeds/alert_thresholds.csv``.

    Rows are NCRP Report 168 (2010) substantial radiation dose levels and notification levels
    for fluoroscopically guided interventions, and AAPM CT dose-check notification and alert
    values (NEMA XR 25). Thresholds are in the quantity's unit (`QUANTITY_UNITS`, plus
    ``peak_skin_dose`` in mGy); minutes are already seconds.

    Parameters
    ----------
    include_unverified : bool
        Also return thresholds not seen in the cited source. Off by default.
    path : Path, optional
        Another thresholds file with the same columns (`ALERT_COLUMNS`).

    Returns
    -------
    list of dict
        One dict per row; ``threshold`` float, ``source_year`` int, ``verified`` bool.

    Raises
    ------
    ValueError
        On a bad row, naming the file and row.
    """
    path = Path(path or SEEDS / "alert_thresholds.csv").resolve()
    rows = _alert_file(path, _stamp(path))
    return [dict(r) for r in rows if include_unverified or r["verified"]]


# ---------------------------------------------------------------------------- SSDE (AAPM 204/220)

@cache
def _ssde_fits() -> dict[str, dict]:
    fits = {}
    for row in _rows(SEEDS / "ssde_coefficients.csv", _SSDE_COLUMNS):
        phantom = row.text("phantom")
        if phantom not in _PHANTOMS or phantom in fits:
            raise row.fail(f"phantom {phantom!r} is unknown or repeated")
        fits[phantom] = {"a": row.number("a", positive=True),
                         "b": row.number("b_per_cm", positive=True),
                         "d_min": row.number("d_min_cm"), "d_max": row.number("d_max_cm"),
                         "verified": row.flag(), "source": row.text("source_title")}
    return fits


def ssde_conversion_factor(effective_diameter_cm: float, phantom: str, *,
                           include_unverified: bool = False) -> float:
    """Size-specific conversion factor f, with SSDE = f x CTDIvol.

    AAPM Report 204 (2011), the exponential fits behind Tables 1A-1D (CTDIvol in the 32 cm
    phantom) and 2A-2D (16 cm phantom)::

        f = a * exp(-b * D)        D in cm; a, b from queries/seeds/ssde_coefficients.csv

    AAPM Report 220 (2014) says to use the water-equivalent diameter Dw for D (see
    `water_equivalent_diameter_mm`; divide by 10 for cm).

    Parameters
    ----------
    effective_diameter_cm : float
        Effective or water-equivalent diameter of the patient, in **cm**.
    phantom : {"body_32cm", "head_16cm"}
        Phantom of the CTDIvol being converted (DICOM CTDIw Phantom Type, 113835).
    include_unverified : bool
        The coefficients are marked unverified (the report's own text was not retrieved), so
        they are off unless this is True.

    Returns
    -------
    float
        The dimensionless factor f.

    Raises
    ------
    ValueError
        Unknown phantom, or a diameter outside the fitted range (8-45 cm): no extrapolation.
    UnverifiedReferenceError
        The coefficients are unverified and `include_unverified` is False.
    """
    fits = _ssde_fits()
    if phantom not in fits:
        raise ValueError(f"unknown phantom {phantom!r}; expected one of {', '.join(sorted(fits))}")
    fit = fits[phantom]
    if not fit["verified"] and not include_unverified:
        raise UnverifiedReferenceError(
            f"SSDE coefficients for {phantom} are unverified ({fit['source']}); "
            "pass include_unverified=True to use them")
    d = float(effective_diameter_cm)
    if not fit["d_min"] <= d <= fit["d_max"]:
        raise ValueError(f"diameter {d:g} cm is outside the AAPM 204 fitted range "
                         f"{fit['d_min']:g}-{fit['d_max']:g} cm (is it in mm?)")
    return fit["a"] * math.exp(-fit["b"] * d)


def water_equivalent_diameter_mm(mean_hu: float, area_mm2: float) -> float:
    """Water-equivalent diameter Dw of a CT slice, in mm (AAPM Report 220, 2014)::

        Dw = 2 * sqrt((mean_HU / 1000 + 1) * A / pi)

    with A the area of the ROI around the patient (table removed) and mean_HU its mean CT
    number. (Formula of AAPM Report 220 as recalled and as used by independent public
    implementations; checked in the tests on a water disc.)

    Parameters
    ----------
    mean_hu : float
        Mean CT number in the ROI, HU (>= -1000).
    area_mm2 : float
        ROI area in mm2 (> 0).

    Returns
    -------
    float
        Dw in mm (DICOM Water Equivalent Diameter (0018,1271) is in mm too).

    Raises
    ------
    ValueError
        Area not positive or finite, or mean CT number below -1000 HU.
    """
    mean_hu, area_mm2 = float(mean_hu), float(area_mm2)
    if not (math.isfinite(area_mm2) and area_mm2 > 0):
        raise ValueError(f"ROI area must be a positive number of mm2, not {area_mm2!r}")
    if not (math.isfinite(mean_hu) and mean_hu >= -1000):
        raise ValueError(f"mean CT number must be >= -1000 HU, not {mean_hu!r}")
    return 2.0 * math.sqrt((mean_hu / 1000.0 + 1.0) * area_mm2 / math.pi)


# ---------------------------------------------------------------------------- DLP -> E

@cache
def _k_factors() -> tuple[dict, ...]:
    out = []
    for row in _rows(SEEDS / "effective_dose_k.csv", _K_COLUMNS):
        basis = row.text("basis")
        if basis not in ("ICRP 60", "ICRP 103"):
            raise row.fail(f"basis must be 'ICRP 60' or 'ICRP 103', not {basis!r}")
        lo, hi = row.band("age_min_years", "age_max_years")
        out.append({"region": row.text("region"), "basis": basis,
                    "age_min": lo if lo is not None else 0.0,
                    "age_max": hi if hi is not None else math.inf,
                    "k": row.number("k_msv_per_mgy_cm", positive=True), "verified": row.flag(),
                    "source": f"{row.text('source_title')}, {row.text('source_table')}"})
    return tuple(out)


def effective_dose_msv(dlp_mgy_cm: float, region: str, age_years: float, *,
                       basis: str = "ICRP 60",
                       include_unverified: bool = False) -> tuple[float, str, str]:
    """Effective dose estimate E = k x DLP for a CT examination.

    k in mSv/(mGy.cm) by body region and age band, from ``queries/seeds/effective_dose_k.csv``:
    basis "ICRP 60" = Shrimpton et al. coefficients (as reproduced in Med Phys 2012;39:2129,
    Table XII); basis "ICRP 103" = that paper's own NCI values at 120 kVp. The age bands are
    this project's convention (nearest reference phantom age). E from DLP is a population
    estimate for a reference patient, not an individual's dose.

    Parameters
    ----------
    dlp_mgy_cm : float
        DLP of the examination in mGy.cm (CTDIvol in the phantom the coefficients assume).
    region : str
        head, neck, chest, abdomen_pelvis or chest_abdomen_pelvis.
    age_years : float
        Patient age in years.
    basis : {"ICRP 60", "ICRP 103"}
        Tissue weighting factors the coefficient was computed with.
    include_unverified : bool
        Also use coefficients not seen in their cited source (e.g. adult neck).

    Returns
    -------
    tuple of (float, str, str)
        E in mSv, the basis, and the source (title and table) of k.

    Raises
    ------
    ValueError
        Negative or non-finite DLP or age, or no coefficient for the region, age and basis.
    UnverifiedReferenceError
        The only coefficient for the lookup is unverified and `include_unverified` is False.
    """
    dlp, age = float(dlp_mgy_cm), float(age_years)
    if not (math.isfinite(dlp) and dlp >= 0):
        raise ValueError(f"DLP must be a non-negative number of mGy.cm, not {dlp_mgy_cm!r}")
    if not (math.isfinite(age) and age >= 0):
        raise ValueError(f"age must be a non-negative number of years, not {age_years!r}")
    matches = [k for k in _k_factors() if k["region"] == region and k["basis"] == basis
               and k["age_min"] <= age < k["age_max"]]
    usable = [k for k in matches if k["verified"] or include_unverified]
    if not usable:
        if matches:
            raise UnverifiedReferenceError(
                f"the {basis} k factor for {region} at age {age:g} is unverified "
                f"({matches[0]['source']}); pass include_unverified=True to use it")
        raise ValueError(f"no {basis} k factor for region {region!r} at age {age:g} years")
    if len(usable) > 1:
        raise ValueError(f"effective_dose_k.csv has {len(usable)} {basis} rows for {region} "
                         f"at age {age:g}; bands must not overlap")
    k = usable[0]
    return k["k"] * dlp, basis, k["source"]
