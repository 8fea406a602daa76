"""A generic SR content-tree walker that finds items by coded concept (PS3.3 C.17.3).

Items are matched on (coding scheme, code value) only, never on meaning text or position.
Legacy SNOMED-RT codes (scheme SRT or 99SDM) are mapped to SNOMED CT with pydicom's
PS3.16-derived mapping, and retired DCM codes to their successors, before comparing.
"""

from __future__ import annotations

import datetime as dt
import functools
from collections.abc import Iterator

from pydicom.dataset import Dataset
from pydicom.multival import MultiValue
from pydicom.sr._snomed_dict import mapping as _SNOMED_MAPPING
from pydicom.sr.coding import Code

__all__ = [
    "MAX_DEPTH",
    "TreeTooDeepError",
    "children",
    "code_key",
    "code_value_of",
    "concept_key",
    "find",
    "find_all",
    "first",
    "num_raw",
    "text_of",
    "uid_of",
    "datetime_of",
]

MAX_DEPTH = 64  # a dose report nests ~6 levels; deeper is malformed or hostile

_SRT_TO_SCT = _SNOMED_MAPPING["SRT"]
_RETIRED = {("DCM", "113853"): ("DCM", "113769"),   # Irradiation Event UID
            ("DCM", "113735"): ("DCM", "113824")}   # Exposure Time


class TreeTooDeepError(ValueError):
    pass


def code_key(scheme: str, value: str) -> tuple[str, str]:
    """Normalised (scheme, value): legacy SRT -> SCT, retired DCM codes -> current."""
    scheme = (scheme or "").strip().upper()
    value = (value or "").strip()
    if scheme in ("SRT", "SNM3", "99SDM"):
        mapped = _SRT_TO_SCT.get(value)
        if mapped is not None:
            return ("SCT", mapped)
    return _RETIRED.get((scheme, value), (scheme, value))


def _one(value) -> str:
    """An element value as one string: a value with a backslash (which pydicom splits into a
    MultiValue although the attribute has VM 1) is kept as the text the file holds."""
    if isinstance(value, (list, tuple, MultiValue)):
        return "\\".join(str(v) for v in value)
    return "" if value is None else str(value)


def _key_of_code_item(item: Dataset) -> tuple[str, str] | None:
    value = item.get("CodeValue") or item.get("LongCodeValue") or item.get("URNCodeValue")
    if value is None:
        return None
    return code_key(_one(item.get("CodingSchemeDesignator", "")), _one(value))


_NO_KEY = ("", "")


def concept_key(item: Dataset) -> tuple[str, str] | None:
    """Normalised concept name of a content item (cached on the item: trees are read-only here)."""
    cached = item.__dict__.get("_kl_concept")
    if cached is None:
        seq = item.get("ConceptNameCodeSequence")
        cached = (_key_of_code_item(seq[0]) if seq else None) or _NO_KEY
        object.__setattr__(item, "_kl_concept", cached)
    return None if cached is _NO_KEY else cached


def _index(item: Dataset) -> dict[tuple[str, str] | None, list[tuple[Dataset, object]]]:
    """Children of `item` by concept key, each with its Value Type (cached on the item)."""
    cached = item.__dict__.get("_kl_index")
    if cached is None:
        cached = {}
        for child in children(item):
            cached.setdefault(concept_key(child), []).append((child, child.get("ValueType")))
        object.__setattr__(item, "_kl_index", cached)
    return cached


@functools.lru_cache(maxsize=4096)
def _target_of(scheme: str, value: str) -> tuple[str, str]:
    return code_key(scheme, value)


def _target(code: Code | tuple[str, str]) -> tuple[str, str]:
    if isinstance(code, Code):
        return _target_of(code.scheme_designator, code.value)
    return _target_of(*code)


def children(item: Dataset) -> list[Dataset]:
    seq = item.get("ContentSequence")
    return list(seq) if seq else []


def find(item: Dataset, code: Code, value_type: str | None = None) -> list[Dataset]:
    """Direct children of `item` named `code` (optionally of one value type)."""
    found = _index(item).get(_target(code), ())
    return [c for c, vt in found if value_type is None or vt == value_type]


def first(item: Dataset, code: Code, value_type: str | None = None) -> Dataset | None:
    for c, vt in _index(item).get(_target(code), ()):
        if value_type is None or vt == value_type:
            return c
    return None


def find_all(item: Dataset, code: Code, value_type: str | None = None,
             _depth: int = 0) -> Iterator[Dataset]:
    """Every descendant named `code`, depth first. Raises TreeTooDeepError past MAX_DEPTH."""
    if _depth > MAX_DEPTH:
        raise TreeTooDeepError(f"content tree nested deeper than {MAX_DEPTH} levels")
    key = _target(code)
    for c in children(item):
        if concept_key(c) == key and (value_type is None or c.get("ValueType") == value_type):
            yield c
        yield from find_all(c, code, value_type, _depth + 1)


def depth(item: Dataset, _depth: int = 0) -> int:
    """Nesting depth of the tree below `item`; stops counting past MAX_DEPTH."""
    if _depth > MAX_DEPTH:
        return _depth
    return max((depth(c, _depth + 1) for c in children(item)), default=_depth)


def code_value_of(item: Dataset | None) -> tuple[tuple[str, str], str] | None:
    """((scheme, value), meaning) of a CODE item's value, normalised."""
    if item is None:
        return None
    seq = item.get("ConceptCodeSequence")
    if not seq:
        return None
    key = _key_of_code_item(seq[0])
    if key is None:
        return None
    return key, str(seq[0].get("CodeMeaning", "") or "")


def text_of(item: Dataset | None) -> str | None:
    if item is None:
        return None
    value = item.get("TextValue")
    return str(value).strip() if value not in (None, "") else None


def uid_of(item: Dataset | None) -> str | None:
    if item is None:
        return None
    value = item.get("UID")
    return _one(value).strip() or None if value not in (None, "") else None


def datetime_of(item: Dataset | None) -> dt.datetime | None:
    """DATETIME item value as a naive datetime (offset, if any, dropped after applying)."""
    if item is None:
        return None
    value = item.get("DateTime")
    return parse_dt(str(value)) if value else None


def parse_dt(text: str) -> dt.datetime | None:
    """DICOM DT (YYYYMMDDHHMMSS.FFFFFF&ZZXX, components optional) -> naive local datetime."""
    text = text.strip()
    for sign in ("+", "-"):
        if sign in text[8:]:
            text = text[: 8 + text[8:].index(sign)]
    main, _, frac = text.partition(".")
    formats = {4: "%Y", 6: "%Y%m", 8: "%Y%m%d", 10: "%Y%m%d%H", 12: "%Y%m%d%H%M", 14: "%Y%m%d%H%M%S"}
    fmt = formats.get(len(main))
    if fmt is None:
        return None
    try:
        value = dt.datetime.strptime(main, fmt)
    except ValueError:
        return None
    if frac.isdigit():
        value = value.replace(microsecond=int(frac[:6].ljust(6, "0")))
    return value


def num_raw(item: Dataset | None) -> tuple[str | None, str | None, bool]:
    """(numeric text, UCUM unit code, has_measured_value) of a NUM item, unconverted.

    Prefers Floating Point Value (0040,A161) when present (PS3.3 C.18.1).
    """
    if item is None:
        return None, None, False
    seq = item.get("MeasuredValueSequence")
    if not seq:
        return None, None, False
    mv = seq[0]
    text = None
    fp = mv.get("FloatingPointValue")
    if fp is not None and fp != "":
        text = repr(float(fp if not isinstance(fp, (list, tuple)) else fp[0]))
    else:
        raw = mv.get("NumericValue")
        if raw is not None and raw != "":
            text = str(raw).strip()
    units = mv.get("MeasurementUnitsCodeSequence")
    unit = None
    if units:
        unit = units[0].get("CodeValue")
        unit = str(unit).strip() if unit is not None else None
    return text, unit, True
