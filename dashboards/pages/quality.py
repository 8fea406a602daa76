"""The data-quality page: what limits the audit of the period."""

from __future__ import annotations

from .. import figures
from ..model import Block, Column, Page, Plot, Section, SiteData, Table
from .common import DATA_ALERT_COLUMNS, empty

__all__ = ["data_quality"]


def _capture(data: SiteData) -> tuple[Block, ...]:
    if data.capture is None:
        return (empty("No completeness check has run: `kerma completeness --warehouse FILE --period YYYY-MM "
                      "--dicomweb URL` compares the archive's studies with the dose objects received."),)
    return (
        Table("dq-capture-completeness", "Archive studies with a dose object, per modality and station",
              data.capture, (Column("modality", "Modality"), Column("station_name", "Station"),
                             Column("site_label", "Site"), Column("n_archive_studies", "Studies in the archive", "int"),
                             Column("n_with_dose_object", "With a dose object", "int"),
                             Column("pct_with_dose_object", "Share", "pct"))),
        Table("dq-capture-missing", "Archive studies without any dose object", data.capture_missing,
              (Column("study_date", "Date", "date"), Column("study_key", "Study (pseudonym)", "key"),
               Column("modality", "Modality"), Column("station_name", "Station"), Column("site_label", "Site"))))


def data_quality(data: SiteData) -> Page:
    """data-quality.html: every count is for the audit period."""
    rooms = Table("dq-rooms", "Studies per room in the period", data.device_studies,
                  (Column("site_label", "Site"), Column("room_label", "Room"), Column("modality", "Modality"),
                   Column("manufacturer", "Manufacturer"), Column("model", "Model"),
                   Column("n_studies", "Studies", "int")))
    unmapped = Table("dq-unmapped", "Study descriptions no exam rule maps", data.unmapped,
                     (Column("modality", "Modality"), Column("study_description", "Study description"),
                      Column("acquisition_protocols", "Acquisition protocols"), Column("sites", "Sites"),
                      Column("n_studies", "Studies", "int")), note="unmapped")
    status = Table("dq-file-status", "Input files of the period by outcome", data.source_status,
                   (Column("status", "Outcome"), Column("reason", "Reason"), Column("n_files", "Files", "int"),
                    Column("size_bytes", "Bytes", "int")), note="period-files")
    not_loaded = Table("dq-files-not-loaded", "Files of the period not loaded, by content hash",
                       data.files_not_loaded,
                       (Column("status", "Outcome"), Column("reason", "Reason"), Column("sha256", "SHA-256", "key"),
                        Column("size_bytes", "Bytes", "int"), Column("run_id", "Ingest run", "long")),
                       note="no-paths")
    weight = Table("dq-weight-share", "Patient weight, height and age recorded", data.weight_share,
                   (Column("site_label", "Site"), Column("modality", "Modality"),
                    Column("n_studies", "Studies", "int"), Column("n_with_weight", "With weight", "int"),
                    Column("pct_with_weight", "With weight", "pct"), Column("n_with_height", "With height", "int"),
                    Column("n_with_age", "With age", "int")))
    issues = Table("dq-value-issues", "Value-level issues by kind and concept", data.value_issues,
                   (Column("kind", "Kind"), Column("concept_code", "Concept code"), Column("concept", "Concept"),
                    Column("n_issues", "Issues", "int"), Column("n_studies", "Studies", "int")), note="issues")
    issue_rows = Table("dq-value-issue-list", "Every value-level issue", data.value_issue_rows,
                       (Column("study_date", "Date", "date"), Column("study_key", "Study (pseudonym)", "key"),
                        Column("site_label", "Site"), Column("room_label", "Room"), Column("kind", "Kind"),
                        Column("concept", "Concept"), Column("raw_value", "Raw value"),
                        Column("raw_unit", "Raw unit"), Column("detail", "Detail", "long")))
    weight_blocks: list[Block] = []
    if not data.weight_share.empty:
        weight_blocks.append(Plot("fig-weight-share", figures.build_weight_share(
            data.weight_share, title="Studies with a patient weight, per site and modality"), ""))
    file_blocks: list[Block] = []
    if not data.source_status.empty:
        file_blocks.append(Plot("fig-file-status", figures.build_file_status(
            data.source_status, title="Input files of the period by outcome"), ""))
    feeds = Table("dq-data-alerts", "Feeds of dose reports: silent devices and volume drops", data.data_alerts,
                  DATA_ALERT_COLUMNS)
    epochs = Table("dq-key-epochs", "Pseudonymisation-key epochs (fingerprints, never the key)", data.key_epochs,
                   (Column("epoch", "Epoch", "int"), Column("key_fingerprint", "Key fingerprint", "key"),
                    Column("started_at", "Started", "datetime"), Column("is_current", "Current", "bool")),
                   note="epochs")
    return Page("data-quality.html", "Data quality", "Data quality",
                (Section("feeds", "Feeds and key epochs", (feeds, epochs)),
                 Section("studies", "Studies per room", (rooms,)),
                 Section("capture", "Capture completeness against the archive", _capture(data)),
                 Section("unmapped", "Unmapped descriptions", (unmapped,)),
                 Section("files", "Quarantined and unused files", (*file_blocks, status, not_loaded)),
                 Section("weight", "Patient size recorded", (*weight_blocks, weight)),
                 Section("issues", "Value-level issues", (issues, issue_rows))))
