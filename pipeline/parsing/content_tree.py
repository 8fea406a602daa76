"""A generic SR content-tree walker that finds items by coded concept (PS3.3 C.17.3).

Items are matched on (coding scheme, code value) only, never on meaning text or position.
Legacy SNOMED-RT codes (scheme SRT or 99SDM) are mapped to SNOMED CT with pydicom's
PS3.16-derived mapping, and retired DCM codes to their successors, before comparing.
"""

from __future__ import annotations

import datetime as dt
import functools
import warnings
from collections.abc import Callable, Iterator

from pydicom.dataelem import RawDataElement
from pydicom.dataset import Dataset
from pydicom.tag import BaseTag
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


# --- element access (speed only: the same values as Dataset.get(keyword)) -----------------------

_CONCEPT_NAME = BaseTag(0x0040A043)      # Concept Name Code Sequence
_CONCEPT_CODE = BaseTag(0x0040A168)      # Concept Code Sequence
_UNITS = BaseTag(0x004008EA)             # Measurement Units Code Sequence
_VALUE_TYPE = BaseTag(0x0040A040)
_CONTENT_SEQUENCE = BaseTag(0x0040A730)
_MEASURED_VALUE = BaseTag(0x0040A300)
_NUMERIC_VALUE = BaseTag(0x0040A30A)
_FLOATING_POINT_VALUE = BaseTag(0x0040A161)
_CODE_VALUE = BaseTag(0x00080100)
_SCHEME = BaseTag(0x00080102)
_CODE_MEANING = BaseTag(0x00080104)
_LONG_CODE_VALUE = BaseTag(0x00080119)
_URN_CODE_VALUE = BaseTag(0x00080120)
_TEXT_VALUE = BaseTag(0x0040A160)
_UID = BaseTag(0x0040A124)
_DATETIME = BaseTag(0x0040A120)


def _get(ds: Dataset, tag: BaseTag):
    """``ds.get(keyword)`` by tag, without the keyword lookup: the element's value (converted
    by pydicom on first access, as ``get`` does) or None when absent."""
    elem = ds._dict.get(tag)
    if elem is None:
        return None
    if not isinstance(elem, RawDataElement):
        return elem.value
    try:
        return ds[tag].value
    except AttributeError:  # what Dataset.get turns into its default
        return None


# A code sequence (concept name, coded value, units) holds the same bytes in thousands of items
# of a report and across reports; what the parser takes from it is remembered by those bytes,
# so pydicom decodes each distinct sequence once per process instead of once per item. The key
# holds everything the decoding depends on (tag, VR, encoding, character set, the bytes);
# a decoding that warned is never remembered, so every file still records its own warnings.
_SQ_MEMO: dict[tuple, object] = {}
_SQ_MEMO_MAX = 16_384
_MISS = object()


def _from_sequence(item: Dataset, tag: BaseTag, take: Callable[[object], object]):
    """``take(item.get(<sequence tag>))``, remembered by the sequence's undecoded bytes."""
    raw = item._dict.get(tag)
    if not isinstance(raw, RawDataElement) or raw.value is None:
        return take(None if raw is None else _get(item, tag))
    charset = item.original_character_set or item._character_set
    key = (tag, raw.VR, raw.is_implicit_VR, raw.is_little_endian, raw.length,
           raw.value, charset if isinstance(charset, str) else tuple(charset))
    found = _SQ_MEMO.get(key, _MISS)
    if found is not _MISS:
        return found
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        found = take(_get(item, tag))
    for w in caught:  # hand them on, in order, to whoever records this file's warnings
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if not caught:
        if len(_SQ_MEMO) >= _SQ_MEMO_MAX:
            _SQ_MEMO.clear()
        _SQ_MEMO[key] = found
    return found


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
    value = _get(item, _CODE_VALUE) or _get(item, _LONG_CODE_VALUE) or _get(item, _URN_CODE_VALUE)
    if value is None:
        return None
    scheme = _get(item, _SCHEME) if _SCHEME in item._dict else ""
    return code_key(_one(scheme), _one(value))


def _concept_of(seq) -> tuple[str, str]:
    return (_key_of_code_item(seq[0]) if seq else None) or _NO_KEY


_NO_KEY = ("", "")


def concept_key(item: Dataset) -> tuple[str, str] | None:
    """Normalised concept name of a content item (cached on the item: trees are read-only here)."""
    cached = item.__dict__.get("_kl_concept")
    if cached is None:
        cached = _from_sequence(item, _CONCEPT_NAME, _concept_of)
        object.__setattr__(item, "_kl_concept", cached)
    return None if cached is _NO_KEY else cached


def _index(item: Dataset) -> dict[tuple[str, str] | None, list[tuple[Dataset, object]]]:
    """Children of `item` by concept key, each with its Value Type (cached on the item)."""
    cached = item.__dict__.get("_kl_index")
    if cached is None:
        cached = {}
        for child in children(item):
            cached.setdefault(concept_key(child), []).append((child, _get(child, _VALUE_TYPE)))
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
    seq = _get(item, _CONTENT_SEQUENCE)
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
    return _from_sequence(item, _CONCEPT_CODE, _coded_value)


def _coded_value(seq) -> tuple[tuple[str, str], str] | None:
    if not seq:
        return None
    key = _key_of_code_item(seq[0])
    if key is None:
        return None
    meaning = _get(seq[0], _CODE_MEANING) if _CODE_MEANING in seq[0]._dict else ""
    return key, str(meaning or "")


def text_of(item: Dataset | None) -> str | None:
    if item is None:
        return None
    value = _get(item, _TEXT_VALUE)
    return str(value).strip() if value not in (None, "") else None


def uid_of(item: Dataset | None) -> str | None:
    if item is None:
        return None
    value = _get(item, _UID)
    return _one(value).strip() or None if value not in (None, "") else None


def datetime_of(item: Dataset | None) -> dt.datetime | None:
    """DATETIME item value as a naive datetime (offset, if any, dropped after applying)."""
    if item is None:
        return None
    value = _get(item, _DATETIME)
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
    seq = _get(item, _MEASURED_VALUE)
    if not seq:
        return None, None, False
    mv = seq[0]
    text = None
    fp = _get(mv, _FLOATING_POINT_VALUE)
    if fp is not None and fp != "":
        text = repr(float(fp if not isinstance(fp, (list, tuple)) else fp[0]))
    else:
        raw = _get(mv, _NUMERIC_VALUE)
        if raw is not None and raw != "":
            text = str(raw).strip()
    return text, _from_sequence(mv, _UNITS, _unit_code), True


def _unit_code(units) -> str | None:
    if not units:
        return None
    unit = _get(units[0], _CODE_VALUE)
    return str(unit).strip() if unit is not None else None
