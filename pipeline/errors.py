"""Exception tree of Kerma Ledger.

::

    DoseAuditError
    ├── InputError              -> the file is quarantined with the error's reason; batch goes on
    │   ├── NotDicomError       (reason: not_dicom, empty_file, truncated)
    │   ├── UnsupportedTransferSyntaxError
    │   ├── UnsafeArchiveMemberError
    │   └── MalformedReportError (carries sop_instance_uid and the concept code, if any)
    ├── ConfigError             -> stop with a one-line message (e.g. no pseudonymisation key)
    │   └── KeyMismatchError    (the key differs from the warehouse's key epoch; nothing loaded)
    ├── WarehouseError          -> stop with a one-line message (cannot open, busy)
    ├── QueryError              -> `kerma sql` refused or could not run the query; one line
    ├── ExtractError            -> stop; a site extract is damaged, altered or incompatible
    └── ArchiveError            -> stop; transient: a flow may retry (archive down, refused)
"""

from __future__ import annotations

__all__ = [
    "ArchiveError",
    "ConfigError",
    "DoseAuditError",
    "ExtractError",
    "InputError",
    "KeyMismatchError",
    "MalformedReportError",
    "NotADoseObjectError",
    "NotDicomError",
    "QueryError",
    "UnsafeArchiveMemberError",
    "UnsupportedTransferSyntaxError",
    "WarehouseError",
]


class DoseAuditError(Exception):
    """Base of every error Kerma Ledger raises on purpose."""


class InputError(DoseAuditError):
    """A bad input file: quarantine it with `reason` and carry on with the batch."""

    reason = "unreadable"
    status = "quarantined"

    def __init__(self, message: str, *, reason: str | None = None,
                 sop_instance_uid: str | None = None, concept: str | None = None) -> None:
        super().__init__(message)
        if reason is not None:
            self.reason = reason
        self.sop_instance_uid = sop_instance_uid
        self.concept = concept


class NotDicomError(InputError):
    reason = "not_dicom"


class UnsupportedTransferSyntaxError(InputError):
    reason = "unsupported_transfer_syntax"


class UnsafeArchiveMemberError(InputError):
    reason = "unsafe_archive_path"


class MalformedReportError(InputError):
    reason = "malformed_report"


class NotADoseObjectError(InputError):
    """Valid DICOM that carries no dose information we count (recorded as not_dose)."""

    reason = "not_a_dose_object"
    status = "not_dose"


class ConfigError(DoseAuditError):
    """A setting is missing or wrong; the command stops."""


class KeyMismatchError(ConfigError):
    """The pseudonymisation key is not the one the warehouse's current key epoch recorded."""


class WarehouseError(DoseAuditError):
    """The warehouse cannot be opened or is busy; the command stops."""


class QueryError(DoseAuditError):
    """An ad hoc query was refused (not one SELECT, a write) or failed; nothing was changed."""


class ExtractError(DoseAuditError):
    """A site extract (or a request for one) that cannot be used; nothing was written."""


class ArchiveError(DoseAuditError):
    """An archive (DIMSE or DICOMweb) cannot be reached, refused us or failed a request."""
