"""DICOM Part 10 bytes for the generator's objects, the bytes pydicom's writer gives (speed only).

Two inputs:

* a ``Header`` (keyword -> value, what the generator assigns to a dataset's top level) and,
  for a dose report, its root content item as an ``sr.Item`` (plain tuples, see sr.py):
  ``encode(header, root)``. Neither is ever made into a Dataset: each element goes straight
  to bytes (the content tree of a report has thousands), and the bytes of what repeats
  (codes, a unit's names, recurring values, whole leaf items) are made once per process.
* a pydicom Dataset (dose screens, spoilt reports, the Basic Text SR): ``encode(ds)``, by a
  small writer over its DataElements.

What is written is what ``Dataset.save_as(enforce_file_format=True)`` writes for the same
dataset (pydicom 3's filewriter): explicit VR little endian, the file meta with its group
length and version, elements in tag order, group lengths above group 6 skipped, sequences
and items of defined length, text in the dataset's character set padded with a space, UIDs
padded with NUL, numbers packed little endian, pixel data OW above 8 bits allocated.
Anything else (raw elements, ambiguous VRs other than pixel data, undefined lengths, values
over 64 KiB in a 16-bit length field, another transfer syntax, a float for a decimal
string ...) raises ``_NotHandled`` inside and the whole object goes through pydicom instead.
Values are validated as pydicom's DataElement validates them (the same validators, in the
reading validation mode). tests/synthetic_studies/test_encoder.py checks the bytes against
pydicom's ``dcmwrite`` of the Dataset ``generator.make_dataset`` builds.
"""

from __future__ import annotations

import copy
import io
import struct

import numpy as np
import pydicom.config
from pydicom.charset import convert_encodings, default_encoding, encode_string
from pydicom.dataelem import DataElement
from pydicom.datadict import dictionary_VR, tag_for_keyword
from pydicom.dataset import Dataset, FileMetaDataset, validate_file_meta
from pydicom.filebase import DicomBytesIO
from pydicom.filewriter import correct_ambiguous_vr_element, write_file_meta_info
from pydicom.multival import MultiValue
from pydicom.sequence import Sequence
from pydicom.uid import UID, ExplicitVRLittleEndian
from pydicom.valuerep import AMBIGUOUS_VR, EXPLICIT_VR_LENGTH_32, VALIDATORS, validate_value

from .sr import Item, to_dataset

__all__ = ["Header", "encode"]


class Header(dict):
    """The top-level elements of a dataset by keyword, assigned as on a Dataset
    (``h.PatientID = "P1"``), in order; ``h.file_meta`` a Header of the File Meta
    Information's. Several values go in a list; a tuple is a sequence of sr Items.
    ``dataset()`` makes the Dataset the same assignments make; ``encode`` writes its bytes
    without making one."""

    def __setattr__(self, keyword: str, value) -> None:
        self[keyword] = value

    def __getattr__(self, keyword: str):
        try:
            return self[keyword]
        except KeyError:
            raise AttributeError(keyword) from None

    def dataset(self, cls: type[Dataset] = Dataset) -> Dataset:
        """The Dataset: each value assigned in turn (a tuple of sr Items as a Sequence)."""
        ds = cls()
        for keyword, value in self.items():
            if keyword == "file_meta":
                ds.file_meta = value.dataset(FileMetaDataset)
            elif type(value) is tuple:
                setattr(ds, keyword, Sequence([to_dataset(item) for item in value]))
            else:
                setattr(ds, keyword, value)
        return ds


def encode(ds: Dataset | Header, root: Item | None = None) -> bytes:
    """The Part 10 bytes of `ds` (with, if given, the elements of its root content item
    `root` at the top level), exactly as pydicom's ``save_as(enforce_file_format=True)``
    writes them."""
    try:
        if isinstance(ds, Header):
            return _encode_header(ds, root)
        if root is None:
            return _fast_encode(ds)
    except _NotHandled:
        pass
    if isinstance(ds, Header):
        ds = ds.dataset()
    if root is not None:
        for elem in to_dataset(root):
            ds[elem.tag] = elem
        return encode(ds)
    return _pydicom_encode(ds)


def _pydicom_encode(ds) -> bytes:
    buf = io.BytesIO()
    ds.save_as(buf, enforce_file_format=True)
    return buf.getvalue()


# --- Datasets ----------------------------------------------------------------------------------

class _NotHandled(Exception):
    pass


_LONG_VR = frozenset(str(vr) for vr in EXPLICIT_VR_LENGTH_32)
_STRING_VR = frozenset({"AE", "AS", "CS", "UR", "DA", "DT", "TM"})
_TEXT_VR = frozenset({"LO", "LT", "SH", "ST", "UC", "UT"})
_NUMBER_STRING_VR = frozenset({"DS", "IS"})
_PACKED_VR = {"FD": "d", "FL": "f", "US": "H", "UL": "L", "SS": "h", "SL": "l", "SV": "q",
              "UV": "Q"}
_BYTES_VR = frozenset({"OB", "OW", "OD", "OF", "OL", "OV", "UN"})
_ITEM = struct.pack("<HHL", 0xFFFE, 0xE000, 0)[:4]


def _fast_encode(ds: Dataset) -> bytes:
    meta = getattr(ds, "file_meta", None)
    if meta is None or meta.get("TransferSyntaxUID") != ExplicitVRLittleEndian:
        raise _NotHandled
    if getattr(ds, "preamble", None) is not None or any(t >> 16 in (0, 2) for t in ds._dict):
        raise _NotHandled
    out = [_file_meta_bytes(ds, meta)]
    if "PixelData" in ds:
        ds["PixelData"].is_undefined_length = False
    _encode_dataset(out, ds, [default_encoding], top=True)
    return b"".join(out)


# The File Meta Information the generator writes (generator._file_meta): these elements only.
_META_TAGS = {0x00020002: "UI", 0x00020003: "UI", 0x00020010: "UI", 0x00020012: "UI",
              0x00020013: "SH"}
_SOP_TAGS = {0x00020002: 0x00080016, 0x00020003: 0x00080018}  # Media Storage SOP <- SOP
_META_START = b"\x00" * 128 + b"DICM" + struct.pack("<HH2sH", 2, 0, b"UL", 4)
_META_VERSION = struct.pack("<HH2sHL", 2, 1, b"OB", 0, 2) + b"\x00\x01"


def _meta_bytes(values: dict[int, object], own: dict[int, object]) -> bytes | None:
    """Preamble, "DICM" and the File Meta Information group from its values by tag, as
    ``save_as`` writes them (with the group length and version it adds); None unless the
    values are those of _META_TAGS, all text, and the dataset's own SOP class and
    instance UIDs (`own`, by tag) do not replace them."""
    if values.keys() != _META_TAGS.keys():
        return None
    parts = []
    for tag, vr in _META_TAGS.items():
        value = values[tag]
        mine = own.get(_SOP_TAGS.get(tag))
        if type(value) not in (str, UID) or not value or (mine and mine != value):
            return None
        parts.append(_string_bytes((tag, vr), value, [default_encoding]))
    body = _META_VERSION + b"".join(parts)
    return _META_START + _U32(len(body)) + body


def _file_meta_bytes(ds: Dataset, meta) -> bytes:
    """The file meta of a Dataset: _meta_bytes if it can, else pydicom's writer."""
    elements = meta._dict
    if all(not e.is_raw and e.VR == _META_TAGS.get(t) for t, e in elements.items()):
        own = {t: e.value for t, e in ((t, ds._dict.get(t)) for t in _SOP_TAGS.values())
               if e is not None}
        data = _meta_bytes({t: e.value for t, e in elements.items()}, own)
        if data is not None:
            return data
    meta = copy.deepcopy(meta)
    sop_class, sop_instance = ds.get("SOPClassUID"), ds.get("SOPInstanceUID")
    if meta.get("MediaStorageSOPClassUID") is None or (
            sop_class and sop_class != meta.MediaStorageSOPClassUID):
        meta.MediaStorageSOPClassUID = sop_class
    if meta.get("MediaStorageSOPInstanceUID") is None or (
            sop_instance and sop_instance != meta.MediaStorageSOPInstanceUID):
        meta.MediaStorageSOPInstanceUID = sop_instance
    validate_file_meta(meta, enforce_standard=True)
    head = DicomBytesIO()
    head.is_little_endian, head.is_implicit_VR = True, False
    head.write(b"\x00" * 128 + b"DICM")
    write_file_meta_info(head, meta, enforce_standard=True)
    return head.getvalue()


_CHARSET_TAG = 0x00080005
_CODE_ITEM_TAGS = (0x00080100, 0x00080102, 0x00080104)  # Code Value, Scheme, Code Meaning
_ENCODINGS: dict[tuple, list[str]] = {}
# The bytes of a code sequence item (Code Value, Coding Scheme Designator, Code Meaning, all
# text) by its three values and character set: thousands of content items share a few
# hundred codes, so each distinct one is encoded once per process.
_CODE_ITEMS: dict[tuple, bytes] = {}


def _encodings(charset) -> list[str]:
    key = charset if isinstance(charset, str) else tuple(charset)
    found = _ENCODINGS.get(key)
    if found is None:
        found = _ENCODINGS[key] = convert_encodings(charset)
    return found


def _dataset_encodings(elements: dict, parent_encodings: list[str]) -> list[str]:
    charset = elements.get(_CHARSET_TAG)
    if charset is not None and charset.is_raw:
        raise _NotHandled
    charset = charset.value if charset is not None else None
    return _encodings(charset if charset is not None else parent_encodings)


def _encode_dataset(out: list[bytes], ds, parent_encodings: list[str], top: bool = False) -> int:
    """Append the encoded elements of `ds` to `out`; returns the number of bytes."""
    elements = ds._dict
    encodings = _dataset_encodings(elements, parent_encodings)
    if len(elements) == 3 and not top:
        items = [elements.get(t) for t in _CODE_ITEM_TAGS]
        if all(type(e) is DataElement and type(e.value) is str for e in items):
            key = (*((e.VR, e.value) for e in items), *encodings)
            data = _CODE_ITEMS.get(key)
            if data is None:
                parts: list[bytes] = []
                _encode_elements(parts, ds, elements, encodings, top)
                data = b"".join(parts)
                if len(_CODE_ITEMS) < 65_536:
                    _CODE_ITEMS[key] = data
            out.append(data)
            return len(data)
    return _encode_elements(out, ds, elements, encodings, top)


def _encode_elements(out: list[bytes], ds, elements: dict, encodings: list[str],
                     top: bool) -> int:
    n = 0
    for tag in sorted(elements, key=int):
        if top:
            n += _encode_top_element(out, ds, tag, elements[tag], encodings)
            continue
        elem = elements[tag]
        if elem.is_raw or elem.VR in AMBIGUOUS_VR:
            raise _NotHandled
        n += _encode_element(out, elem, encodings)
    return n


def _encode_top_element(out: list[bytes], ds, tag, elem, encodings: list[str]) -> int:
    """One element at the top level of `ds` (group lengths above group 6 are not written,
    an ambiguous VR is resolved as pydicom resolves it); returns the number of bytes."""
    if not tag & 0xFFFF and tag >> 16 > 6:
        return 0
    if elem.is_raw:
        raise _NotHandled
    if elem.VR in AMBIGUOUS_VR:
        correct_ambiguous_vr_element(elem, ds, True)
    return _encode_element(out, elem, encodings)


def _encode_element(out: list[bytes], elem, encodings: list[str]) -> int:
    vr = str(elem.VR)
    tag = elem.tag
    if elem.is_undefined_length or elem.is_buffered:
        raise _NotHandled
    if vr == "SQ":
        header_at = len(out)
        out.append(b"")
        length = 0
        for item in elem.value:
            if getattr(item, "is_undefined_length_sequence_item", False):
                raise _NotHandled
            item_at = len(out)
            out.append(b"")
            size = _encode_dataset(out, item, encodings)
            out[item_at] = _ITEM + struct.pack("<L", size)
            length += 8 + size
        out[header_at] = struct.pack("<HH2sHL", tag >> 16, tag & 0xFFFF, b"SQ", 0, length)
        return 12 + length
    value = elem.value
    empty = not value if type(value) is str else elem.is_empty  # a str: VM 0 when ""
    value = b"" if empty else _value_bytes(elem, vr, encodings)
    if vr in _LONG_VR:
        out.append(struct.pack("<HH2sHL", tag >> 16, tag & 0xFFFF, vr.encode(), 0, len(value)))
        out.append(value)
        return 12 + len(value)
    if len(value) > 0xFFFF:
        raise _NotHandled  # pydicom rewrites the VR as UN, with a warning
    out.append(struct.pack("<HH2sH", tag >> 16, tag & 0xFFFF, vr.encode(), len(value)))
    out.append(value)
    return 8 + len(value)


def _text(value: str, encodings: list[str]) -> bytes:
    if len(encodings) == 1 and encodings[0] in ("latin_1", "iso8859"):
        try:
            return value.encode(encodings[0])
        except UnicodeError:
            pass
    return encode_string(value, encodings)


def _is_multi(value) -> bool:
    return type(value) is not str and isinstance(value, (MultiValue, list, tuple, np.ndarray))


def _value_bytes(elem, vr: str, encodings: list[str]) -> bytes:
    value = elem.value
    if vr in _STRING_VR or vr == "UI":
        if vr in ("DA", "DT", "TM") and not isinstance(value, str):
            raise _NotHandled
        text = "\\".join(value) if _is_multi(value) else value
        if len(text) % 2:
            text += "\0" if vr == "UI" else " "
        return text.encode(default_encoding) if isinstance(text, str) else text
    if vr in _TEXT_VR:
        if _is_multi(value):
            if not isinstance(value[0], str):
                raise _NotHandled
            data = b"\\".join(_text(v, encodings) for v in value)
        elif isinstance(value, str):
            data = _text(value, encodings)
        else:
            raise _NotHandled
        return data + b" " if len(data) % 2 else data
    if vr in _NUMBER_STRING_VR:
        if _is_multi(value):
            text = "\\".join(x.original_string if hasattr(x, "original_string") else str(x)
                              for x in value)
        else:
            text = value.original_string if hasattr(value, "original_string") else str(value)
        if len(text) % 2:
            text += " "
        return bytes(text, default_encoding)
    if vr == "PN":
        values = [value] if elem.VM == 1 else value
        data = b"\\".join(v.encode(encodings) for v in values)
        return data + b" " if len(data) % 2 else data
    fmt = _PACKED_VR.get(vr)
    if fmt is not None:
        if value is None or value == "":
            return b""
        if hasattr(value, "append"):
            if vr == "SS":
                raise _NotHandled  # LUT descriptor rule
            return struct.pack(f"<{len(value)}{fmt}", *value)
        return struct.pack("<" + fmt, value)
    if vr in _BYTES_VR and isinstance(value, bytes):
        return value + b"\x00" if len(value) % 2 else value
    raise _NotHandled


# --- content items (sr.Item tuples) -------------------------------------------------------------
#
# An element of an Item is ((tag, VR), value), the value a str or a tuple of Items (a
# sequence). Its bytes are those _encode_element writes for the DataElement sr.to_dataset
# makes of it. What repeats is encoded once per validation mode and character set and
# remembered: text elements (codes, relationship and value types, a unit's names, recurring
# numbers) and whole items without content children (code items, and NUM, TEXT ... items
# whose value recurs). Nothing that holds an invalid value is remembered, so each file that
# holds one warns again, as pydicom would.

_U16, _U32 = struct.Struct("<H").pack, struct.Struct("<L").pack
_CONTENT_TAG = 0x0040A730
_MEMO_LIMIT = 65_536  # entries per table; a full table starts again
# (validation mode, *encodings) -> (element bytes by (key, value), item bytes by Item)
_MEMOS: dict[tuple, tuple[dict, dict]] = {}
# (tag, VR) -> the fixed start of the element: tag, VR and, for a 32-bit length, 2 zero bytes
_HEADS: dict[tuple, tuple[bytes, bool]] = {}
_INVALID = [0]  # values found invalid so far in this process


def _head(key: tuple) -> tuple[bytes, bool]:
    found = _HEADS.get(key)
    if found is None:
        tag, vr = key
        is_long = vr in _LONG_VR
        found = _HEADS[key] = (struct.pack("<HH2s", tag >> 16, tag & 0xFFFF, vr.encode())
                               + (b"\0\0" if is_long else b""), is_long)
    return found


def _remember(table: dict, key, data: bytes) -> None:
    if len(table) >= _MEMO_LIMIT:
        table.clear()
    table[key] = data


def _element_bytes(key: tuple, value, encodings: list[str], memo: tuple[dict, dict]) -> bytes:
    if type(value) is str:
        data = memo[0].get((key, value))
        return data if data is not None else _new_string(key, value, encodings, memo[0])
    if type(value) is tuple:
        return _sequence_bytes(key, value, encodings, memo)
    raise _NotHandled


def _new_string(key: tuple, value: str, encodings: list[str], strings: dict) -> bytes:
    invalid = _INVALID[0]
    data = _string_bytes(key, value, encodings)
    if _INVALID[0] == invalid:
        _remember(strings, (key, value), data)
    return data


def _sequence_bytes(key: tuple, items: tuple, encodings: list[str],
                    memo: tuple[dict, dict]) -> bytes:
    parts = []
    for node in items:
        if type(node) is not tuple:  # a Dataset in a public sr.*_item tree
            raise _NotHandled
        body = _item_bytes(node, encodings, memo)
        parts.append(_ITEM + _U32(len(body)))
        parts.append(body)
    data = b"".join(parts)
    return _head(key)[0] + _U32(len(data)) + data


def _item_bytes(node: Item, encodings: list[str], memo: tuple[dict, dict]) -> bytes:
    strings, items = memo
    leaf = node[-1][0][0] != _CONTENT_TAG
    if leaf:
        data = items.get(node)
        if data is not None:
            return data
        invalid = _INVALID[0]
    parts = []
    last = -1
    for key, value in node:
        tag = key[0]
        if tag <= last or tag == _CHARSET_TAG:  # pydicom would sort; own charset: rare
            raise _NotHandled
        last = tag
        if type(value) is str:  # _element_bytes, inline: most elements are text
            data = strings.get((key, value))
            if data is None:
                data = _new_string(key, value, encodings, strings)
        else:
            data = _element_bytes(key, value, encodings, memo)
        parts.append(data)
    data = b"".join(parts)
    if leaf and _INVALID[0] == invalid:
        _remember(items, node, data)
    return data


def _validate(vr: str, value) -> None:
    """Validate as DataElement validates (the same validator; pydicom warns or raises if
    `value` is invalid, and it is counted)."""
    validator = VALIDATORS.get(vr)
    if validator is not None and not validator(vr, value)[0]:
        _INVALID[0] += 1
        validate_value(vr, value, pydicom.config.settings.reading_validation_mode)


def _string_bytes(key: tuple, value: str, encodings: list[str], validate: bool = True) -> bytes:
    """A text, code string, UID, date-time, decimal or integer string or person name element,
    its value validated unless `validate` is false (the caller validated its parts)."""
    tag, vr = key
    if validate:
        _validate(vr, value)
    if not value:
        data = b""
    elif vr in _TEXT_VR:
        data = _text(value, encodings)
        if len(data) % 2:
            data += b" "
    elif vr == "PN" and "=" not in value:  # one component group: its text
        data = _text(value, encodings)
        if len(data) % 2:
            data += b" "
    elif vr in _STRING_VR or vr in _NUMBER_STRING_VR or vr == "UI":
        data = value.encode(default_encoding)
        if len(data) % 2:
            data += b"\0" if vr == "UI" else b" "
    else:
        raise _NotHandled
    head, is_long = _head(key)
    if is_long:
        return head + _U32(len(data)) + data
    if len(data) > 0xFFFF:
        raise _NotHandled
    return head + _U16(len(data)) + data


# --- Headers --------------------------------------------------------------------------------------

_KEYS: dict[str, tuple[int, str]] = {}  # keyword -> (tag, VR)


def _key(keyword: str) -> tuple[int, str]:
    found = _KEYS.get(keyword)
    if found is None:
        tag = tag_for_keyword(keyword)
        if tag is None:
            raise _NotHandled
        found = _KEYS[keyword] = (tag, dictionary_VR(tag))
    return found


def _encode_header(header: Header, root: Item | None) -> bytes:
    """A Header's bytes, with its root content item's elements: the file meta, then every
    element in tag order (the values _top_element_bytes takes)."""
    meta = header.get("file_meta")
    charset = header.get("SpecificCharacterSet")
    if not isinstance(meta, Header) or type(charset) is not str:
        raise _NotHandled
    meta_values = {_key(k)[0]: v for k, v in meta.items()}
    if meta_values.get(0x00020010) != ExplicitVRLittleEndian:
        raise _NotHandled
    keyed = [(_key(k), v) for k, v in header.items() if k != "file_meta"]
    own = {key[0]: value for key, value in keyed if key[0] in (0x00080016, 0x00080018)}
    head = _meta_bytes(meta_values, own)
    if head is None:
        raise _NotHandled
    if root is not None:
        keyed += root
    keyed.sort(key=_tag_of)
    encodings = _encodings(charset)
    mode = pydicom.config.settings.reading_validation_mode
    memo = _MEMOS.get((mode, *encodings))
    if memo is None:
        memo = _MEMOS[(mode, *encodings)] = ({}, {})
    out = [head]
    last = -1
    for key, value in keyed:
        tag, vr = key
        if tag == last or tag >> 16 in (0, 2):
            raise _NotHandled
        last = tag
        if vr in AMBIGUOUS_VR:  # pixel data: OW above 8 bits allocated, as pydicom decides
            bits = header.get("BitsAllocated")
            if tag != _PIXEL_DATA or type(value) is not bytes or type(bits) is not int:
                raise _NotHandled
            key = (tag, "OW" if bits > 8 else "OB")
        out.append(_top_element_bytes(key, value, encodings, memo))
    return b"".join(out)


_PIXEL_DATA = 0x7FE00010
_NUMBERS = {vr: struct.Struct("<" + fmt) for vr, fmt in (
    ("US", "H"), ("SS", "h"), ("UL", "L"), ("SL", "l"), ("FD", "d"), ("FL", "f"))}


def _top_element_bytes(key: tuple, value, encodings: list[str], memo: tuple[dict, dict]) -> bytes:
    """One element of a Header: a str (or UID), an int (IS, or a binary integer VR), a float
    (FD, FL), a list of str (several values), bytes (OB, OW), an empty Sequence or a tuple
    of Items; anything else is left to pydicom."""
    tag, vr = key
    kind = type(value)
    if kind is str or kind is tuple:
        return _element_bytes(key, value, encodings, memo)
    if kind is UID:
        return _element_bytes(key, str(value), encodings, memo)
    if kind is int and vr == "IS":
        return _string_bytes(key, str(value), encodings)
    if (kind is int and vr in ("US", "SS", "UL", "SL")) or (kind is float and vr in ("FD", "FL")):
        _validate(vr, value)
        number = _NUMBERS[vr]
        return _head(key)[0] + _U16(number.size) + number.pack(value)
    if kind is list and value and all(type(v) is str for v in value):
        if vr in _TEXT_VR and encodings[0] not in ("latin_1", "iso8859") or len(encodings) > 1:
            raise _NotHandled  # each value encoded alone: the same bytes in one byte sets only
        for v in value:
            _validate(vr, v)
        return _string_bytes(key, "\\".join(value), encodings, validate=False)
    if kind is bytes and vr in ("OB", "OW"):
        _validate(vr, value)
        data = value + b"\0" if len(value) % 2 else value
        return _head(key)[0] + _U32(len(data)) + data
    if isinstance(value, Sequence) and not value and vr == "SQ":
        return _head(key)[0] + _U32(0)
    raise _NotHandled


def _tag_of(pair: tuple) -> int:
    return pair[0][0]
