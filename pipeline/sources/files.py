"""Input files: walk folders and archives, read bytes into pydicom Datasets (the I/O shell).

Archives (.zip, .tar, .tar.gz, .tgz) are read in memory, never extracted, so a hostile member
name cannot write anywhere; such members are still reported (quarantined with a reason).
"""

from __future__ import annotations

import contextlib
import io
import struct
import tarfile
import warnings
import zipfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

import pydicom
import pydicom.config
from pydicom.dataset import Dataset
from pydicom.errors import InvalidDicomError
from pydicom.hooks import hooks
from pydicom.uid import UID

from ..errors import NotDicomError, UnsafeArchiveMemberError, UnsupportedTransferSyntaxError

__all__ = ["Candidate", "check_complete", "iter_candidates", "lenient_pydicom", "read_dataset",
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
            files = sorted(p for p in root.rglob("*") if p.is_file())
        elif root.exists():
            files = [root]
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


class _Truncated(Exception):
    pass


_LONG_VRS = {b"OB", b"OD", b"OF", b"OL", b"OV", b"OW", b"SQ", b"SV", b"UC", b"UN", b"UR",
             b"UT", b"UV"}


def _scan(buf: bytes, pos: int, end: int | None, implicit: bool, little: bool,
          depth: int = 0) -> int:
    """Walk element headers from `pos`; until `end`, or until a delimiter when `end` is None."""
    if depth > 200:
        raise _Truncated("nesting too deep")
    fmt = "<" if little else ">"
    size = len(buf)
    while True:
        if end is not None and pos >= end:
            if pos > end:
                raise _Truncated("element runs past its enclosing item")
            return pos
        if pos + 8 > size:
            raise _Truncated("file ends inside a data element header")
        if struct.unpack_from("<H", buf, pos)[0] == 0x0002:
            group, elem = struct.unpack_from("<HH", buf, pos)  # file meta: always explicit LE
        else:
            group, elem = struct.unpack_from(fmt + "HH", buf, pos)
        if group == 0xFFFE:
            (length,) = struct.unpack_from(fmt + "L", buf, pos + 4)
            pos += 8
            if elem in (0xE00D, 0xE0DD):
                return pos
            if elem == 0xE000:
                if length == 0xFFFFFFFF:
                    pos = _scan(buf, pos, None, implicit, little, depth + 1)
                else:
                    if pos + length > size:
                        raise _Truncated("file ends inside a sequence item")
                    pos = _scan(buf, pos, pos + length, implicit, little, depth + 1)
                continue
            raise _Truncated("unexpected delimiter")
        explicit = group == 0x0002 or not implicit
        if explicit:
            vr = buf[pos + 4:pos + 6]
            if vr in _LONG_VRS:
                if pos + 12 > size:
                    raise _Truncated("file ends inside a data element header")
                (length,) = struct.unpack_from((fmt if group != 2 else "<") + "L", buf, pos + 8)
                pos += 12
            else:
                (length,) = struct.unpack_from((fmt if group != 2 else "<") + "H", buf, pos + 6)
                pos += 8
        else:
            (length,) = struct.unpack_from(fmt + "L", buf, pos + 4)
            pos += 8
        if length == 0xFFFFFFFF:
            pos = _scan(buf, pos, None, implicit, little, depth + 1)  # items up to delimiter
        else:
            if pos + length > size:
                raise _Truncated("file ends inside a data element value")
            pos += length


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


def check_complete(data: bytes, ds: Dataset) -> None:
    """Raise NotDicomError(reason='truncated') if the byte stream ends mid-element.

    pydicom stops quietly at end of file inside an undefined-length sequence, so a cut-short
    transfer would otherwise look like a smaller, valid report.
    """
    ts = transfer_syntax(ds)
    if ts is not None and ts.is_deflated:
        return  # the deflate stream is checked by zlib while pydicom inflates it
    implicit = ts.is_implicit_VR if ts is not None else True
    little = ts.is_little_endian if ts is not None else True
    start = 132 if data[128:132] == b"DICM" else 0
    try:
        _scan(data, start, len(data), implicit, little)
    except (_Truncated, struct.error) as exc:
        raise NotDicomError(f"file is truncated: {exc}", reason="truncated") from None


def read_dataset(data: bytes, path: str) -> Dataset:
    """Parse DICOM bytes (with or without preamble) stopping before pixel data.

    Raises NotDicomError with reason empty_file, not_dicom or truncated.
    """
    if not data:
        raise NotDicomError(f"{path}: empty file", reason="empty_file")
    has_preamble = len(data) >= 132 and data[128:132] == b"DICM"
    if not has_preamble:
        head = data[:4]
        group = struct.unpack("<H", head[:2])[0] if len(head) >= 2 else None
        if group not in (0x0002, 0x0008, 0x0010, 0x0018, 0x0020):
            raise NotDicomError(f"{path}: not a DICOM file (no preamble and no DICOM "
                                "element at the start)", reason="not_dicom")
    try:
        ds = pydicom.dcmread(io.BytesIO(data), stop_before_pixels=True, force=not has_preamble)
    except (InvalidDicomError, EOFError, struct.error, ValueError, OSError,
            NotImplementedError, KeyError, IndexError, TypeError, AttributeError,
            UnicodeDecodeError, OverflowError, MemoryError) as exc:
        reason = "truncated" if has_preamble and isinstance(exc, (EOFError, struct.error)) else (
            "malformed_dicom" if has_preamble else "not_dicom")
        raise NotDicomError(f"{path}: cannot be read as DICOM ({type(exc).__name__}: {exc})",
                            reason=reason) from exc
    if "SOPClassUID" not in ds and "SOPInstanceUID" not in ds:
        raise NotDicomError(f"{path}: no SOP Class/Instance UID: not a DICOM object",
                            reason="not_dicom")
    transfer_syntax(ds, path)
    check_complete(data, ds)
    return ds
