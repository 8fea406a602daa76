"""Build SR content items (PS3.3 C.17.3) as plain pydicom Datasets.

Tiny constructors, one per value type used by the X-Ray Radiation Dose SR IOD
(PS3.3 A.35.8: CONTAINER, CODE, NUM, TEXT, UIDREF, DATETIME). Relationships are by value.
"""

from __future__ import annotations

import datetime as dt
import math
import warnings

import pydicom.config
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
_CONTINUITY, _TEMPLATE, _MAPPING, _TEMPLATE_ID, _CONTENT, _CONCEPT_CODE = (_element(k) for k in (
    "ContinuityOfContent", "ContentTemplateSequence", "MappingResource", "TemplateIdentifier",
    "ContentSequence", "ConceptCodeSequence"))
_TEXT, _UID, _DATETIME = (_element(k) for k in ("TextValue", "UID", "DateTime"))
_CONSTANT = frozenset(int(e[0]) for e in (_CODE_VALUE, _SCHEME, _MEANING, _RELATIONSHIP,
                                          _VALUE_TYPE, _CONTINUITY, _MAPPING, _TEMPLATE_ID))


# The instance attributes of an empty Dataset, to start a new item from (speed only:
# Dataset.__init__ sets each through Dataset.__setattr__); containers are made afresh.
_BLANK = dict(vars(Dataset()))
_FRESH = tuple(k for k, v in _BLANK.items() if isinstance(v, (dict, list, set)))


def _dataset(*elements: tuple[tuple, object]) -> Dataset:
    """A Dataset of ((tag, VR), value) pairs: the elements ``ds.Keyword = value`` would make
    (VR from the data dictionary), without its per-assignment keyword lookup (speed only)."""
    ds = Dataset.__new__(Dataset)
    attrs = ds.__dict__
    attrs.update(_BLANK)
    for name in _FRESH:
        attrs[name] = _BLANK[name].copy()
    attrs["_dict"] = {tag: _new_element(tag, vr, value) for (tag, vr), value in elements}
    return ds


# Elements whose few distinct values repeat in every item (codes, relationship and value
# types): each distinct one is made (and validated, as DataElement does, in pydicom's reading
# validation mode) once, then copied attribute for attribute. A value whose validation warned
# is never reused, so no warning is skipped by a copy.
_TEMPLATES: dict[tuple, DataElement] = {}


def _new_element(tag, vr: str, value) -> DataElement:
    if tag not in _CONSTANT or type(value) is not str:
        return DataElement(tag, vr, value)
    key = (tag, vr, value, pydicom.config.settings.reading_validation_mode)
    template = _TEMPLATES.get(key)
    if template is None:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            element = DataElement(tag, vr, value)
        for w in caught:  # hand them on, in order
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        if caught or len(_TEMPLATES) >= 65_536:
            return element
        template = _TEMPLATES[key] = element  # kept apart: only copies are handed out
    element = object.__new__(DataElement)
    element.__dict__.update(template.__dict__)
    return element


def code_sequence_item(code: Code | tuple[str, str, str]) -> Dataset:
    if isinstance(code, Code):
        value, scheme, meaning = code.value, code.scheme_designator, code.meaning
    else:
        value, scheme, meaning = code
    return _dataset((_CODE_VALUE, value), (_SCHEME, scheme), (_MEANING, meaning))


def _item(relationship: str | None, value_type: str, concept: Code, *more) -> Dataset:
    """A content item: Relationship Type (unless None), Value Type, Concept Name, `more`."""
    name = ((_VALUE_TYPE, value_type), (_CONCEPT_NAME, Sequence([code_sequence_item(concept)])))
    if relationship is not None:
        return _dataset((_RELATIONSHIP, relationship), *name, *more)
    return _dataset(*name, *more)


def _children(children: list[Dataset] | None) -> tuple:
    return ((_CONTENT, Sequence(children)),) if children else ()


def container(concept: Code, children: list[Dataset], relationship: str | None = CONTAINS,
              template: str | None = None) -> Dataset:
    more = [(_CONTINUITY, "SEPARATE")]
    if template is not None:
        more.append((_TEMPLATE, Sequence([_dataset((_MAPPING, "DCMR"),
                                                    (_TEMPLATE_ID, template))])))
    more.append((_CONTENT, Sequence(children)))
    return _item(relationship, "CONTAINER", concept, *more)


def code_item(concept: Code, value: Code | tuple[str, str, str], relationship: str = CONTAINS,
              children: list[Dataset] | None = None) -> Dataset:
    return _item(relationship, "CODE", concept,
                 (_CONCEPT_CODE, Sequence([code_sequence_item(value)])), *_children(children))


def num_item(concept: Code, value: float, unit: Code | None, relationship: str = CONTAINS,
             children: list[Dataset] | None = None) -> Dataset:
    """NUM item; `unit=None` writes a measured value without units (a deliberate defect)."""
    number = (_NUMERIC_VALUE, format_ds(value))
    measured = _dataset(number) if unit is None else \
        _dataset(number, (_UNITS, Sequence([code_sequence_item(unit)])))
    return _item(relationship, "NUM", concept, (_MEASURED, Sequence([measured])),
                 *_children(children))


def text_item(concept: Code, text: str, relationship: str = CONTAINS) -> Dataset:
    return _item(relationship, "TEXT", concept, (_TEXT, text))


def uid_item(concept: Code, value: str, relationship: str = CONTAINS) -> Dataset:
    return _item(relationship, "UIDREF", concept, (_UID, value))


def datetime_item(concept: Code, when: dt.datetime, relationship: str = CONTAINS) -> Dataset:
    return _item(relationship, "DATETIME", concept, (_DATETIME, dt_value(when)))
