"""Input files: walk folders and archives, read bytes into pydicom Datasets (the I/O shell).

Archives (.zip, .tar, .tar.gz, .tgz) are read in memory, never extracted, so a hostile member
name cannot write anywhere; such members are still reported (quarantined with a reason).
"""

from __future__ import annotations

import contextlib
import io
import os
import struct
import tarfile
import warnings
import zipfile
import zlib
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

import pydicom
import pydicom.config
from pydicom.dataset import Dataset
from pydicom.errors import InvalidDicomError
from pydicom.filereader import data_element_generator
from pydicom.hooks import hooks
from pydicom.uid import UID

from ..errors import NotDicomError, UnsafeArchiveMemberError, UnsupportedTransferSyntaxError

__all__ = ["Candidate", "ReadResult", "iter_candidates", "lenient_pydicom", "read_object",
           "transfer_syntax"]

_ARCHIVE_SUFFIXES = (".zip", ".tar", ".tar.gz", ".tgz")


@dataclass(frozen=True, slots=True)
class Candidate:
    """One input file: where it came from and how to get its bytes."""

    path: str
    read: Callable[[], bytes]


def _file_reader(path: Path) -> Callable[[], bytes]:
    return path.read_bytes


def _unsafe(name: str) -> str | None:
    p = PurePosixPath(name.replace("\\", "/"))
    if p.is_absolute() or (len(name) > 1 and name[1] == ":"):
        return "absolute path"
    if ".." in p.parts:
        return "path traversal ('..')"
    return None


def _raise(exc: Exception) -> Callable[[], bytes]:
    def read() -> bytes:
        raise exc
    return read


def _zip_candidates(path: Path) -> Iterator[Candidate]:
    with zipfile.ZipFile(path) as archive:
        for info in sorted(archive.infolist(), key=lambda i: i.filename):
            if info.is_dir():
                continue
            display = f"{path}!{info.filename}"
            problem = _unsafe(info.filename)
            if problem:
                yield Candidate(display, _raise(UnsafeArchiveMemberError(
                    f"{display}: archive member name is unsafe ({problem}); not read")))
                continue
            yield Candidate(display, lambda info=info: _read_zip_member(path, info))


def _read_zip_member(path: Path, info: zipfile.ZipInfo) -> bytes:
    with zipfile.ZipFile(path) as archive:
        return archive.read(info)


def _tar_candidates(path: Path) -> Iterator[Candidate]:
    with tarfile.open(path) as archive:
        members = sorted(archive.getmembers(), key=lambda m: m.name)
    for member in members:
        if member.isdir():
            continue
        display = f"{path}!{member.name}"
        problem = _unsafe(member.name)
        if problem is None and (member.issym() or member.islnk()):
            problem = "link member"
        elif problem is None and not member.isfile():
            problem = "not a regular file"
        if problem:
            yield Candidate(display, _raise(UnsafeArchiveMemberError(
                f"{display}: archive member is unsafe ({problem}); not read")))
            continue
        yield Candidate(display, lambda name=member.name: _read_tar_member(path, name))


def _read_tar_member(path: Path, name: str) -> bytes:
    with tarfile.open(path) as archive:
        handle = archive.extractfile(name)
        return handle.read() if handle is not None else b""


def _is_archive(path: Path) -> bool:
    name = path.name.lower()
    if not name.endswith(_ARCHIVE_SUFFIXES):
        return False
    if name.endswith(".zip"):
        return zipfile.is_zipfile(path)
    try:
        return tarfile.is_tarfile(path)
    except OSError:
        return False


def iter_candidates(paths: list[Path]) -> Iterator[Candidate]:
    """Every input file under `paths` (files, folders walked recursively, archives), sorted."""
    for root in paths:
        root = Path(root)
        if root.is_dir():
            files = _walk_sorted(root)
        elif root.exists():
            files = iter([root])
        else:
            yield Candidate(str(root), _raise(NotDicomError(f"{root}: no such file or folder",
                                                            reason="missing_file")))
            continue
        for path in files:
            if _is_archive(path):
                yield from (_zip_candidates(path) if path.name.lower().endswith(".zip")
                            else _tar_candidates(path))
            else:
                yield Candidate(str(path.resolve()), _file_reader(path))


def _walk_sorted(folder: Path) -> Iterator[Path]:
    """The files under `folder`, in the order of ``sorted(p for p in folder.rglob("*") if
    p.is_file())`` (parts compared name by name), walked lazily: one folder's names are held at
    a time, never the whole tree's paths (143 000 Path objects held ~67 MiB through a 100k-study
    ingest; bench/ingest_scale.py). Like rglob, symlinked folders are not entered; symlinks to
    files are kept."""
    try:
        with os.scandir(folder) as it:
            entries = sorted((e.name, e.is_dir(follow_symlinks=False)) for e in it)
    except PermissionError:   # as rglob: an unreadable folder is passed over
        return
    for name, is_dir in entries:
        path = folder / name
        if is_dir:
            yield from _walk_sorted(path)
        elif path.is_file():
            yield path


# What pydicom raises when the bytes of one element cannot be decoded (an unknown VR, a value
# that does not fit its VR, a sequence that ends early). pydicom decodes lazily, so these
# surface only when the parser first reads the element, not in dcmread.
_DECODING_ERRORS = (NotImplementedError, ValueError, struct.error, KeyError, IndexError,
                    OverflowError, EOFError, TypeError, AttributeError,
                    OSError)  # pydicom: "No tag to read at file position ..." (reading memory)


def _decoding_errors_quarantine(convert: Callable) -> Callable:
    """Wrap pydicom's raw-element conversion hook: an element whose bytes cannot be decoded
    makes the file a NotDicomError (malformed_dicom) naming the tag; nothing else is caught."""
    def hook(raw, data, *, encoding=None, ds=None, **kwargs) -> None:
        try:
            convert(raw, data, encoding=encoding, ds=ds, **kwargs)
        except NotDicomError:
            raise
        except _DECODING_ERRORS as exc:
            first = str(exc).splitlines()[0][:200] if str(exc) else ""
            raise NotDicomError(
                f"element {raw.tag} (VR {raw.VR}) cannot be decoded "
                f"({type(exc).__name__}: {first}); the file is damaged",
                reason="malformed_dicom") from exc
    return hook


@contextlib.contextmanager
def lenient_pydicom() -> Iterator[list[warnings.WarningMessage]]:
    """Production reading: invalid values warn (recorded) instead of raising, and an element
    that cannot be decoded at all quarantines its file (NotDicomError, malformed_dicom)."""
    settings = pydicom.config.settings
    before = settings.reading_validation_mode
    convert = hooks.raw_element_value
    settings.reading_validation_mode = pydicom.config.WARN
    hooks.register_callback("raw_element_value", _decoding_errors_quarantine(convert))
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            yield caught
    finally:
        settings.reading_validation_mode = before
        hooks.register_callback("raw_element_value", convert)


def transfer_syntax(ds: Dataset, path: str = "file") -> UID | None:
    """The file's Transfer Syntax UID (None without file meta); UnsupportedTransferSyntaxError
    when (0002,0010) holds something that is not a transfer syntax (a damaged or unknown UID),
    since then nothing tells how the dataset is encoded."""
    meta = getattr(ds, "file_meta", None)
    ts = meta.get("TransferSyntaxUID") if meta is not None else None
    if ts is None:
        return None
    if not isinstance(ts, UID) or not ts.is_transfer_syntax:
        shown = str(ts)[:80]
        raise UnsupportedTransferSyntaxError(
            f"{path}: Transfer Syntax UID (0002,0010) {shown!r} is not a transfer syntax this "
            "reader knows, so the encoding of the dataset is unknown; re-send the object in "
            "Explicit or Implicit VR Little Endian")
    return ts


class _BoundedStream(io.BytesIO):
    """The file's bytes as a stream that notes where a read first came up short.

    pydicom reads a value with ``read(length)`` and skips a deferred one with ``seek``; at the
    end of the data both quietly return less, and in its lenient mode pydicom turns "end of
    file before the delimiter" into a warning. Watching the stream pydicom itself reads from
    tells exactly whether the file ended inside an element, without parsing the bytes twice
    or by our own rules. Two short reads are normal: the 8-byte element header read that finds
    the end of the data set, and the 128-byte preamble read of a file without one.
    """

    def __init__(self, data: bytes) -> None:
        super().__init__(data)
        self.size = len(data)
        self.cut_at: int | None = None

    def read(self, n: int | None = -1) -> bytes:
        pos = self.tell()
        out = super().read(n)
        if (self.cut_at is None and n is not None and 0 < n and len(out) < n
                and not (n == 8 and not out) and not (pos == 0 and n == 128)):
            self.cut_at = pos + len(out)
        return out

    def seek(self, offset: int, whence: int = 0) -> int:
        pos = super().seek(offset, whence)
        if pos > self.size and self.cut_at is None:
            self.cut_at = self.size
        return pos


# What dcmread raises on bytes that end early or are not DICOM at all.
_READ_ERRORS = (InvalidDicomError, EOFError, struct.error, ValueError, OSError,
                NotImplementedError, KeyError, IndexError, TypeError, AttributeError,
                UnicodeDecodeError, OverflowError, MemoryError, LookupError, zlib.error)
# (0002-0020): file meta, identification, patient, acquisition and study groups; a data set
# without file meta starts with the lowest group it holds, one of these in any dose object.
_FIRST_GROUPS = {0x0002, 0x0004, 0x0008, 0x0010, 0x0018, 0x0020}


@dataclass(frozen=True, slots=True)
class ReadResult:
    """A parsed data set (pixel data not loaded) and what the read noticed."""

    dataset: Dataset
    pixel_data_truncated: str | None = None  # the detail, when only pixel data was cut short


def _looks_like_bare_dataset(data: bytes) -> bool:
    """A data set without preamble and file meta starts with an element tag of a low group,
    in little or big endian (PS3.10 7.1: such streams exist; pydicom reads them with force)."""
    if len(data) < 8:
        return False
    little, big = struct.unpack("<H", data[:2])[0], struct.unpack(">H", data[:2])[0]
    return little in _FIRST_GROUPS or big in _FIRST_GROUPS


def _check_pixel_data(stream: _BoundedStream, ds: Dataset, path: str) -> str | None:
    """Walk what follows the header (pixel data, trailing padding) with pydicom's own element
    reader, skipping values unread; the detail text when the file ends inside it."""
    implicit, little = ds.original_encoding
    if implicit is None:
        return None
    start = stream.tell()
    try:
        for _ in data_element_generator(stream, implicit, little, defer_size=0):
            pass
    except (EOFError, OSError, struct.error, ValueError) as exc:
        return (f"{path}: pixel data from byte {start} is cut short "
                f"({type(exc).__name__}: {str(exc).splitlines()[0][:120] if str(exc) else ''}); "
                "the dose attributes before it are complete")
    if stream.cut_at is not None:
        return (f"{path}: the file ends at byte {stream.size} inside the pixel data that "
                f"starts at byte {start}; the dose attributes before it are complete")
    return None


_SR_CLASS_PREFIX = "1.2.840.10008.5.1.4.1.1.88."
_CONTENT_SEQUENCE = 0x0040A730


def _last_tag(ds: Dataset) -> int:
    """The highest top-level tag present (where a file cut at an element boundary stops)."""
    return max((int(tag) for tag in ds.keys()), default=0)


def _check_sr_content(ds: Dataset, path: str) -> None:
    """A structured report must end with its Content Sequence (0040,A730), type 1 in the SR
    Document Content Module (PS3.3 C.17.3); one that stops at an element boundary before it,
    with no later element present, was cut short rather than written that way."""
    sop_class = str(ds.get("SOPClassUID", "") or "")
    if not sop_class.startswith(_SR_CLASS_PREFIX) or _CONTENT_SEQUENCE in ds:
        return
    last = _last_tag(ds)
    if last < _CONTENT_SEQUENCE:
        raise NotDicomError(
            f"{path}: file is truncated: the structured report ends at element "
            f"({last >> 16:04X},{last & 0xFFFF:04X}), before its Content Sequence (0040,A730)",
            reason="truncated")


def read_object(data: bytes, path: str) -> ReadResult:
    """Parse DICOM bytes (Part 10 file, or a bare data set in any transfer syntax) with pydicom.

    The header is parsed in full; pixel data is never loaded, only walked to see that it is
    complete. Completeness is decided on the stream pydicom reads from (see _BoundedStream).

    Raises
    ------
    NotDicomError
        reason ``empty_file``, ``not_dicom``, ``malformed_dicom`` or ``truncated`` (the file
        ends inside its header, i.e. inside the attributes we audit).
    UnsupportedTransferSyntaxError
        (0002,0010) names no transfer syntax.
    """
    if not data:
        raise NotDicomError(f"{path}: empty file", reason="empty_file")
    has_preamble = len(data) >= 132 and data[128:132] == b"DICM"
    if not has_preamble and len(data) < 132 and not data.strip(b"\x00"):
        raise NotDicomError(f"{path}: file is truncated: {len(data)} bytes of a preamble and "
                            "nothing after it", reason="truncated")
    if not has_preamble and not _looks_like_bare_dataset(data):
        raise NotDicomError(f"{path}: not a DICOM file (no preamble and no DICOM "
                            "element at the start)", reason="not_dicom")
    stream = _BoundedStream(data)
    try:
        ds = pydicom.dcmread(stream, stop_before_pixels=True, force=not has_preamble)
    except _READ_ERRORS as exc:
        cut = stream.cut_at is not None or isinstance(exc, (EOFError, zlib.error))
        reason = "truncated" if cut else ("malformed_dicom" if has_preamble else "not_dicom")
        what = "ends inside its header" if cut else "cannot be read as DICOM"
        raise NotDicomError(f"{path}: {what} ({type(exc).__name__}: "
                            f"{str(exc).splitlines()[0][:200] if str(exc) else ''})",
                            reason=reason) from exc
    if stream.cut_at is not None:
        raise NotDicomError(
            f"{path}: file is truncated: it ends at byte {stream.size}, inside a data element "
            "of its header (the attributes before the pixel data)", reason="truncated")
    if "SOPClassUID" not in ds and "SOPInstanceUID" not in ds:
        meta = getattr(ds, "file_meta", None)
        last = _last_tag(ds)
        if meta is not None and "MediaStorageSOPInstanceUID" in meta and last < 0x00080016:
            raise NotDicomError(  # the file meta names an object the data set never reaches
                f"{path}: file is truncated: its data set ends at element "
                f"({last >> 16:04X},{last & 0xFFFF:04X}), before the SOP Class UID (0008,0016) "
                "its file meta information announces", reason="truncated")
        raise NotDicomError(f"{path}: no SOP Class/Instance UID: not a DICOM object",
                            reason="not_dicom")
    ts = transfer_syntax(ds, path)
    _check_sr_content(ds, path)
    pixel_note = None
    if stream.tell() < stream.size and not (ts is not None and ts.is_deflated):
        pixel_note = _check_pixel_data(stream, ds, path)
    return ReadResult(ds, pixel_note)
