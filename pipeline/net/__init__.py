"""Network I/O: the Storage SCP, the DIMSE and DICOMweb pulls, TLS and the inbox on disk.

Application-layer code (the command line and the flows) uses these; nothing in the core
imports them.
"""

from __future__ import annotations

from .dicomweb import pull_dicomweb
from .dimse import PullSummary, pull_dimse
from .inbox import archive_recorded, have_instances, write_atomic
from .scp import make_storage_ae, start_storage_scp
from .tls import client_context, server_context

__all__ = ["PullSummary", "archive_recorded", "client_context", "have_instances",
           "make_storage_ae", "pull_dicomweb", "pull_dimse", "server_context",
           "start_storage_scp", "write_atomic"]
