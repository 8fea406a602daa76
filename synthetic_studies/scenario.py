"""Load the demo scenario (``scenario.toml``) into frozen dataclasses.

The scenario is data: an invented network of sites and irradiating units, the exam
archetypes they perform, the stories the audit must find and the defects to inject.
"""

from __future__ import annotations

import datetime as dt
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

__all__ = [
    "DEFAULT_SCENARIO",
    "DeviceExam",
    "DeviceSpec",
    "DoseChange",
    "ExamSpec",
    "HEADER_IMAGE_MODALITIES",
    "Scenario",
    "Site",
    "load_scenario",
]

DEFAULT_SCENARIO = "scenario.toml"


@dataclass(frozen=True, slots=True)
class Site:
    id: str
    institution: str
    address: str


@dataclass(frozen=True, slots=True)
class ExamSpec:
    """One exam archetype: what a study of this kind irradiates, at demo dose levels."""

    id: str
    modality: str
    study_description: str
    sigma: float
    events: tuple[dict[str, Any], ...]
    target_region: tuple[str, str, str] | None = None
    phantom: str | None = None
    fluoro_runs: tuple[int, int] | None = None
    fluoro_time_s: float | None = None
    acquisitions: tuple[int, int] | None = None
    contrast: bool = False  # intravenous contrast given (CT: PS3.3 C.7.6.4 Contrast/Bolus)
    unmapped: bool = False  # by design, no default exam rule (pipeline/exam_rules.toml) maps it


@dataclass(frozen=True, slots=True)
class DeviceExam:
    exam: str
    share: float
    dose_scale: float = 1.0
    description: str | None = None
    protocol: str | None = None


@dataclass(frozen=True, slots=True)
class DoseChange:
    from_month: int
    dose_scale: float
    note: str


@dataclass(frozen=True, slots=True)
class DeviceSpec:
    """One irradiating unit with its stable identity (PS3.16 TID 1004 device observer).

    ``header_images``: a unit with ``reports = "rdsr"`` that also sends its images, so the
    archive holds both the dose report and image headers carrying dose attributes for the
    same irradiation events (shared Irradiation Event UID (0008,3010)). Only CT and MG units
    have a header-image writer. ``reports``: ``rdsr``, ``image_header`` (no report, dose in
    each image's header) or ``dose_screen`` (a CT unit without dose reports that sends one
    Secondary Capture dose screen per study, its numbers in an Exposure Dose Sequence).
    """

    id: str
    site: str
    modality: str
    department: str
    station_name: str
    manufacturer: str
    model: str
    serial: str
    software: str
    location: str
    share: float
    reports: str
    exams: tuple[DeviceExam, ...]
    changes: tuple[DoseChange, ...] = ()
    cumulative_reports: float = 0.0
    biplane: bool = False
    head_technique: str = "spiral"
    target_filter: tuple[str, str] | None = None
    header_images: bool = False
    # Descriptions no default exam rule maps (brain perfusion, a knee radiograph...): with
    # probability Scenario.unmapped_share a study on this unit is one of these instead.
    unmapped: tuple[DeviceExam, ...] = ()


HEADER_IMAGE_MODALITIES = ("CT", "MG")


@dataclass(frozen=True, slots=True)
class Scenario:
    name: str
    start_date: dt.date
    uid_namespace: str
    patient_pool_fraction: float
    paediatric_share: float
    weight_missing_share: float
    height_missing_share: float
    sites: dict[str, Site]
    exams: dict[str, ExamSpec]
    devices: tuple[DeviceSpec, ...]
    special: dict[str, dict[str, Any]] = field(default_factory=dict)
    defects: dict[str, int] = field(default_factory=dict)
    unmapped_share: float = 0.0

    def device(self, device_id: str) -> DeviceSpec:
        for device in self.devices:
            if device.id == device_id:
                return device
        raise KeyError(f"scenario has no device {device_id!r}")


def load_scenario(path: Path | str | None = None) -> Scenario:
    """Read a scenario TOML file (default: the bundled demo network).

    Raises
    ------
    ValueError
        If a device names an unknown site or exam, a share is not positive, or a device asks
        for header images without sending an RDSR or on a modality with no image writer.
    """
    if path is None:
        text = resources.files(__package__).joinpath(DEFAULT_SCENARIO).read_text("utf-8")
    else:
        text = Path(path).read_text(encoding="utf-8")
    return _from_mapping(tomllib.loads(text))


def _from_mapping(raw: dict[str, Any]) -> Scenario:
    net = raw["network"]
    sites = {s["id"]: Site(s["id"], s["institution"], s.get("address", "")) for s in raw["site"]}
    exams = {key: _exam(key, value) for key, value in raw["exam"].items()}
    devices = tuple(_device(d) for d in raw["device"])
    for device in devices:
        if device.site not in sites:
            raise ValueError(f"device {device.id!r} names unknown site {device.site!r}")
        for de in device.exams + device.unmapped:
            if de.exam not in exams:
                raise ValueError(f"device {device.id!r} names unknown exam {de.exam!r}")
            if de.share <= 0:
                raise ValueError(f"device {device.id!r} exam {de.exam!r}: share must be > 0")
            if exams[de.exam].unmapped != (de in device.unmapped):
                raise ValueError(f"device {device.id!r} exam {de.exam!r}: an archetype with "
                                 f"unmapped = true belongs in `unmapped`, and only there")
        if device.header_images and device.reports != "rdsr":
            raise ValueError(f"device {device.id!r}: header_images needs reports = 'rdsr' "
                             f"(an image_header unit writes its images anyway)")
        if device.reports not in ("rdsr", "image_header", "dose_screen"):
            raise ValueError(f"device {device.id!r}: reports must be rdsr, image_header or "
                             f"dose_screen, not {device.reports!r}")
        if device.reports == "dose_screen" and device.modality != "CT":
            raise ValueError(f"device {device.id!r}: only CT units send dose screens")
        if device.header_images and device.modality not in HEADER_IMAGE_MODALITIES:
            raise ValueError(f"device {device.id!r}: no header-image writer for modality "
                             f"{device.modality!r} (have {', '.join(HEADER_IMAGE_MODALITIES)})")
    return Scenario(
        name=net["name"],
        start_date=dt.date.fromisoformat(str(net["start_date"])),
        uid_namespace=net["uid_namespace"],
        patient_pool_fraction=float(net["patient_pool_fraction"]),
        paediatric_share=float(net["paediatric_share"]),
        weight_missing_share=float(net["weight_missing_share"]),
        height_missing_share=float(net["height_missing_share"]),
        sites=sites,
        exams=exams,
        devices=devices,
        special=dict(raw.get("special", {})),
        defects={k: int(v) for k, v in raw.get("defects", {}).items()},
        unmapped_share=float(net.get("unmapped_share", 0.0)),
    )


def _exam(key: str, e: dict[str, Any]) -> ExamSpec:
    return ExamSpec(
        id=key,
        modality=e["modality"],
        study_description=e["study_description"],
        sigma=float(e["sigma"]),
        events=tuple(e["events"]),
        target_region=tuple(e["target_region"]) if "target_region" in e else None,
        phantom=e.get("phantom"),
        fluoro_runs=tuple(e["fluoro_runs"]) if "fluoro_runs" in e else None,
        fluoro_time_s=float(e["fluoro_time"]) if "fluoro_time" in e else None,
        acquisitions=tuple(e["acquisitions"]) if "acquisitions" in e else None,
        contrast=bool(e.get("contrast", False)),
        unmapped=bool(e.get("unmapped", False)),
    )


def _device(d: dict[str, Any]) -> DeviceSpec:
    return DeviceSpec(
        id=d["id"],
        site=d["site"],
        modality=d["modality"],
        department=d["department"],
        station_name=d["station_name"],
        manufacturer=d["manufacturer"],
        model=d["model"],
        serial=d["serial"],
        software=d["software"],
        location=d["location"],
        share=float(d["share"]),
        reports=d["reports"],
        exams=tuple(DeviceExam(**x) for x in d["exams"]),
        changes=tuple(DoseChange(**c) for c in d.get("changes", ())),
        cumulative_reports=float(d.get("cumulative_reports", 0.0)),
        biplane=bool(d.get("biplane", False)),
        head_technique=d.get("head_technique", "spiral"),
        target_filter=tuple(d["target_filter"]) if "target_filter" in d else None,
        header_images=bool(d.get("header_images", False)),
        unmapped=tuple(DeviceExam(**x) for x in d.get("unmapped", ())),
    )
