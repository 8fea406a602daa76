"""Build SR content items (PS3.3 C.17.3) as plain pydicom Datasets.

Tiny constructors, one per value type used by the X-Ray Radiation Dose SR IOD
(PS3.3 A.35.8: CONTAINER, CODE, NUM, TEXT, UIDREF, DATETIME). Relationships are by value.
"""

from __future__ import annotations

import datetime as dt
import math

from pydicom.datadict import dictionary_VR, tag_for_keyword
from pydicom.dataelem import DataElement
from pydicom.dataset import Dataset
from pydicom.sequence import Sequence
from pydicom.sr.coding import Code
from pydicom.tag import Tag

__all__ = [
    "code_item",
    "code_sequence_item",
    "container",
    "datetime_item",
    "dt_value",
    "format_ds",
    "num_item",
    "text_item",
    "uid_item",
]

CONTAINS = "CONTAINS"
HAS_CONCEPT_MOD = "HAS CONCEPT MOD"
HAS_OBS_CONTEXT = "HAS OBS CONTEXT"
HAS_PROPERTIES = "HAS PROPERTIES"


def format_ds(value: float) -> str:
    """Decimal String (max 16 characters) that reads back as exactly `value`."""
    if not math.isfinite(value):
        raise ValueError(f"cannot encode {value!r} as a DICOM Decimal String")
    if float(value).is_integer() and abs(value) < 1e15:
        return str(int(value))
    text = repr(float(value))
    if len(text) <= 16:
        return text
    for digits in range(15, 0, -1):
        text = f"{value:.{digits}g}"
        if len(text) <= 16:
            return text
    raise ValueError(f"cannot fit {value!r} into 16 characters")  # pragma: no cover


def dt_value(when: dt.datetime) -> str:
    """DICOM DT value without offset (the header's Timezone Offset From UTC applies)."""
    return when.strftime("%Y%m%d%H%M%S")


def _element(keyword: str) -> tuple:
    tag = Tag(tag_for_keyword(keyword))
    return tag, dictionary_VR(tag)


_CODE_VALUE, _SCHEME, _MEANING = (_element(k) for k in (
    "CodeValue", "CodingSchemeDesignator", "CodeMeaning"))
_RELATIONSHIP, _VALUE_TYPE, _CONCEPT_NAME = (_element(k) for k in (
    "RelationshipType", "ValueType", "ConceptNameCodeSequence"))
_NUMERIC_VALUE, _UNITS, _MEASURED = (_element(k) for k in (
    "NumericValue", "MeasurementUnitsCodeSequence", "MeasuredValueSequence"))


def _dataset(*elements: tuple[tuple, object]) -> Dataset:
    """A Dataset of ((tag, VR), value) pairs: the elements ``ds.Keyword = value`` would make
    (VR from the data dictionary), without its per-assignment keyword lookup (speed only)."""
    return Dataset({tag: DataElement(tag, vr, value) for (tag, vr), value in elements})


def code_sequence_item(code: Code | tuple[str, str, str]) -> Dataset:
    if isinstance(code, Code):
        value, scheme, meaning = code.value, code.scheme_designator, code.meaning
    else:
        value, scheme, meaning = code
    return _dataset((_CODE_VALUE, value), (_SCHEME, scheme), (_MEANING, meaning))


def _item(relationship: str | None, value_type: str, concept: Code) -> Dataset:
    name = ((_VALUE_TYPE, value_type), (_CONCEPT_NAME, Sequence([code_sequence_item(concept)])))
    if relationship is not None:
        return _dataset((_RELATIONSHIP, relationship), *name)
    return _dataset(*name)


def container(concept: Code, children: list[Dataset], relationship: str | None = CONTAINS,
              template: str | None = None) -> Dataset:
    item = _item(relationship, "CONTAINER", concept)
    item.ContinuityOfContent = "SEPARATE"
    if template is not None:
        tpl = Dataset()
        tpl.MappingResource = "DCMR"
        tpl.TemplateIdentifier = template
        item.ContentTemplateSequence = Sequence([tpl])
    item.ContentSequence = Sequence(children)
    return item


def code_item(concept: Code, value: Code | tuple[str, str, str], relationship: str = CONTAINS,
              children: list[Dataset] | None = None) -> Dataset:
    item = _item(relationship, "CODE", concept)
    item.ConceptCodeSequence = Sequence([code_sequence_item(value)])
    if children:
        item.ContentSequence = Sequence(children)
    return item


def num_item(concept: Code, value: float, unit: Code | None, relationship: str = CONTAINS,
             children: list[Dataset] | None = None) -> Dataset:
    """NUM item; `unit=None` writes a measured value without units (a deliberate defect)."""
    item = _item(relationship, "NUM", concept)
    number = (_NUMERIC_VALUE, format_ds(value))
    measured = _dataset(number) if unit is None else \
        _dataset(number, (_UNITS, Sequence([code_sequence_item(unit)])))
    item[_MEASURED[0]] = DataElement(_MEASURED[0], _MEASURED[1], Sequence([measured]))
    if children:
        item.ContentSequence = Sequence(children)
    return item


def text_item(concept: Code, text: str, relationship: str = CONTAINS) -> Dataset:
    item = _item(relationship, "TEXT", concept)
    item.TextValue = text
    return item


def uid_item(concept: Code, value: str, relationship: str = CONTAINS) -> Dataset:
    item = _item(relationship, "UIDREF", concept)
    item.UID = value
    return item


def datetime_item(concept: Code, when: dt.datetime, relationship: str = CONTAINS) -> Dataset:
    item = _item(relationship, "DATETIME", concept)
    item.DateTime = dt_value(when)
    return item
