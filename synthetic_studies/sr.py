"""Build SR content items (PS3.3 C.17.3): as plain tuples (``*_node``) and as pydicom Datasets.

Tiny constructors, one per value type used by the X-Ray Radiation Dose SR IOD
(PS3.3 A.35.8: CONTAINER, CODE, NUM, TEXT, UIDREF, DATETIME). Relationships are by value.
The generator builds its content trees as tuples; ``to_dataset`` turns one into the Dataset
the ``*_item`` functions return, and encoder.py writes the same bytes from the tuples.
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

__all__ = [
    "Item",
    "code_item",
    "code_node",
    "code_sequence_item",
    "code_sequence_node",
    "container",
    "container_node",
    "datetime_item",
    "datetime_node",
    "dt_value",
    "element_key",
    "format_ds",
    "num_item",
    "num_node",
    "text_item",
    "text_node",
    "to_dataset",
    "uid_item",
    "uid_node",
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


def element_key(keyword: str) -> tuple[int, str]:
    """(tag, VR) of an element, as an Item holds it: the tag a plain int (compared fast),
    the VR the dictionary's."""
    tag = tag_for_keyword(keyword)
    return int(tag), dictionary_VR(tag)


_CODE_VALUE, _SCHEME, _MEANING = (element_key(k) for k in (
    "CodeValue", "CodingSchemeDesignator", "CodeMeaning"))
_RELATIONSHIP, _VALUE_TYPE, _CONCEPT_NAME = (element_key(k) for k in (
    "RelationshipType", "ValueType", "ConceptNameCodeSequence"))
_NUMERIC_VALUE, _UNITS, _MEASURED = (element_key(k) for k in (
    "NumericValue", "MeasurementUnitsCodeSequence", "MeasuredValueSequence"))
_CONTINUITY, _TEMPLATE, _MAPPING, _TEMPLATE_ID, _CONTENT, _CONCEPT_CODE = (
    element_key(k) for k in (
    "ContinuityOfContent", "ContentTemplateSequence", "MappingResource", "TemplateIdentifier",
    "ContentSequence", "ConceptCodeSequence"))
_TEXT, _UID, _DATETIME = (element_key(k) for k in ("TextValue", "UID", "DateTime"))
_CONSTANT = frozenset(e[0] for e in (
    _CODE_VALUE, _SCHEME, _MEANING, _RELATIONSHIP, _VALUE_TYPE, _CONTINUITY, _MAPPING,
    _TEMPLATE_ID))


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
    attrs["_dict"] = {elem.tag: elem for elem in (_new_element(tag, vr, value)
                                                  for (tag, vr), value in elements)}
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


# --- content items as plain tuples ------------------------------------------------------------
#
# An ``Item`` is a content item (or any sequence item) before it becomes a Dataset: its
# elements in tag order as ((tag, VR), value) pairs, a value being a str or, for a sequence,
# a tuple of Items. The generator builds its trees from these; ``to_dataset`` makes the
# pydicom Dataset (what the public *_item functions return) and encoder.py writes the same
# bytes straight from the tuples (hashable: it remembers the bytes of items that repeat).
# Code items are made once per distinct code and shared.

Item = tuple  # tuple[tuple[tuple[int, str], str | tuple[Item, ...]], ...]

_CODE_NODES: dict[tuple[str, str, str], Item] = {}


def code_sequence_node(code: Code | tuple[str, str, str]) -> Item:
    """Code Value, Coding Scheme Designator, Code Meaning: one shared Item per code."""
    key = (code.value, code.scheme_designator, code.meaning) if isinstance(code, Code) \
        else tuple(code)
    node = _CODE_NODES.get(key)
    if node is None:
        node = ((_CODE_VALUE, key[0]), (_SCHEME, key[1]), (_MEANING, key[2]))
        if len(_CODE_NODES) < 65_536:
            _CODE_NODES[key] = node
    return node


def _item_node(relationship: str | None, value_type: str, concept: Code, *more) -> Item:
    """A content item: Relationship Type (unless None), Value Type, Concept Name, `more`
    (elements whose tags follow (0040,A043), in tag order)."""
    name = ((_VALUE_TYPE, value_type), (_CONCEPT_NAME, (code_sequence_node(concept),)))
    if relationship is not None:
        return ((_RELATIONSHIP, relationship), *name, *more)
    return (*name, *more)


def _children_node(children: list[Item] | None) -> tuple:
    return ((_CONTENT, tuple(children)),) if children else ()


def container_node(concept: Code, children: list[Item], relationship: str | None = CONTAINS,
                   template: str | None = None) -> Item:
    more = [(_CONTINUITY, "SEPARATE")]
    if template is not None:
        more.append((_TEMPLATE, (((_MAPPING, "DCMR"), (_TEMPLATE_ID, template)),)))
    more.append((_CONTENT, tuple(children)))
    return _item_node(relationship, "CONTAINER", concept, *more)


def code_node(concept: Code, value: Code | tuple[str, str, str], relationship: str = CONTAINS,
              children: list[Item] | None = None) -> Item:
    return _item_node(relationship, "CODE", concept,
                      (_CONCEPT_CODE, (code_sequence_node(value),)), *_children_node(children))


def num_node(concept: Code, value: float, unit: Code | None, relationship: str = CONTAINS,
             children: list[Item] | None = None) -> Item:
    """NUM item; `unit=None` writes a measured value without units (a deliberate defect)."""
    number = (_NUMERIC_VALUE, format_ds(value))
    # (0040,08EA) Measurement Units Code Sequence comes before (0040,A30A) Numeric Value
    measured = (number,) if unit is None else \
        ((_UNITS, (code_sequence_node(unit),)), number)
    return _item_node(relationship, "NUM", concept, (_MEASURED, (measured,)),
                      *_children_node(children))


def text_node(concept: Code, text: str, relationship: str = CONTAINS) -> Item:
    return _item_node(relationship, "TEXT", concept, (_TEXT, text))


def uid_node(concept: Code, value: str, relationship: str = CONTAINS) -> Item:
    return _item_node(relationship, "UIDREF", concept, (_UID, value))


def datetime_node(concept: Code, when: dt.datetime, relationship: str = CONTAINS) -> Item:
    return _item_node(relationship, "DATETIME", concept, (_DATETIME, dt_value(when)))


def to_dataset(node: Item) -> Dataset:
    """The pydicom Dataset of an Item, sequences made of Datasets recursively (a sequence
    may also hold Datasets already made: the public *_item functions take those)."""
    return _dataset(*(((key, Sequence([n if isinstance(n, Dataset) else to_dataset(n)
                                        for n in value]))
                       if type(value) is tuple else (key, value)) for key, value in node))


# --- the same items as pydicom Datasets -------------------------------------------------------

def code_sequence_item(code: Code | tuple[str, str, str]) -> Dataset:
    return to_dataset(code_sequence_node(code))


def container(concept: Code, children: list[Dataset], relationship: str | None = CONTAINS,
              template: str | None = None) -> Dataset:
    return to_dataset(container_node(concept, children, relationship, template))


def code_item(concept: Code, value: Code | tuple[str, str, str], relationship: str = CONTAINS,
              children: list[Dataset] | None = None) -> Dataset:
    return to_dataset(code_node(concept, value, relationship, children))


def num_item(concept: Code, value: float, unit: Code | None, relationship: str = CONTAINS,
             children: list[Dataset] | None = None) -> Dataset:
    """NUM item; `unit=None` writes a measured value without units (a deliberate defect)."""
    return to_dataset(num_node(concept, value, unit, relationship, children))


def text_item(concept: Code, text: str, relationship: str = CONTAINS) -> Dataset:
    return to_dataset(text_node(concept, text, relationship))


def uid_item(concept: Code, value: str, relationship: str = CONTAINS) -> Dataset:
    return to_dataset(uid_node(concept, value, relationship))


def datetime_item(concept: Code, when: dt.datetime, relationship: str = CONTAINS) -> Dataset:
    return to_dataset(datetime_node(concept, when, relationship))
