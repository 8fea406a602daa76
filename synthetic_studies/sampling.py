"""Draw synthetic studies from a scenario: pure and seeded.

Each study is drawn from its own random stream, keyed by (seed, study index), so any study
can be made alone, in any process, in any order, and comes out the same. UIDs are derived
from the seed and the scenario's namespace; Device Observer UIDs only from the namespace and
the device id, so a unit keeps its identity across corpora.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import math
from typing import Any

import numpy as np

from .scenario import DeviceExam, DeviceSpec, ExamSpec, Scenario
from .specs import CtEvent, PatientSpec, ProjectionEvent, ReportSpec, StudySpec

__all__ = [
    "device_observer_uid",
    "make_study",
    "month_starts",
    "uid",
]

_PAED_AGE = 16.0


def uid(*parts: object) -> str:
    """A deterministic DICOM UID under the 2.25 root (ITU-T X.667 UUID-derived form)."""
    digest = hashlib.sha256("\x1f".join(map(str, parts)).encode()).digest()
    return "2.25." + str(int.from_bytes(digest[:16], "big"))


def device_observer_uid(scenario: Scenario, device_id: str) -> str:
    """Stable Device Observer UID (PS3.16 TID 1004) of a unit; independent of the seed."""
    return uid(scenario.uid_namespace, "device", device_id)


def month_starts(start: dt.date, months: int) -> list[dt.date]:
    out, y, m = [], start.year, start.month
    for _ in range(months + 1):
        out.append(dt.date(y, m, 1))
        y, m = (y + 1, 1) if m == 12 else (y, m + 1)
    return out


def _rng(seed: int, *parts: object) -> np.random.Generator:
    digest = hashlib.sha256("\x1f".join(map(str, (seed, *parts))).encode()).digest()
    return np.random.default_rng(int.from_bytes(digest[:8], "big"))


def _sig(x: float, digits: int = 4) -> float:
    """Round to `digits` significant figures: what the file will carry, exactly."""
    if x == 0 or not math.isfinite(x):
        return float(x)
    return float(f"{x:.{digits}g}")


def _lognormal(rng: np.random.Generator, median: float, sigma: float) -> float:
    return float(median * math.exp(rng.normal(0.0, sigma)))


# --- patients ----------------------------------------------------------------------------

def _pool_for(exam: ExamSpec, paediatric: bool) -> str:
    if exam.modality == "MG":
        return "breast"
    if exam.modality == "XA":
        return "cardiac"
    return "child" if paediatric else "adult"


def _patient(scenario: Scenario, seed: int, pool: str, number: int,
             study_date: dt.date) -> PatientSpec:
    rng = _rng(seed, "patient", pool, number)
    if pool == "breast":
        sex, age = "F", rng.uniform(50.0, 71.0)
    elif pool == "cardiac":
        sex, age = ("M" if rng.random() < 0.7 else "F"), rng.triangular(40.0, 67.0, 90.0)
    elif pool == "child":
        sex, age = ("M" if rng.random() < 0.5 else "F"), rng.uniform(0.3, _PAED_AGE - 0.1)
    else:
        sex, age = ("M" if rng.random() < 0.48 else "F"), rng.triangular(18.0, 62.0, 97.0)
    birth = study_date - dt.timedelta(days=int(age * 365.25))
    if pool == "child":
        weight = _sig(max(3.0, 3.5 + 2.6 * age + rng.normal(0, 0.12) * (3.5 + 2.6 * age)), 3)
        height = round(min(1.85, 0.52 + 0.065 * age + rng.normal(0, 0.04)), 2)
    else:
        weight = _sig(_lognormal(rng, 80.0 if sex == "M" else 69.0, 0.18), 3)
        height = round(float(rng.normal(1.76 if sex == "M" else 1.63, 0.07)), 2)
    if rng.random() < scenario.weight_missing_share:
        weight = None
    if rng.random() < scenario.height_missing_share:
        height = None
    letter = {"adult": "A", "child": "C", "breast": "B", "cardiac": "K"}[pool]
    pid = f"TRN{letter}{number:07d}"
    return PatientSpec(pid, "TARNWICK-MPI", f"Synthetic^Patient {pid}", sex, birth, weight, height)


def _age_years(birth: dt.date, on: dt.date) -> float:
    return round((on - birth).days / 365.25, 2)


# --- devices, exams, dates ------------------------------------------------------------------

def _pick(rng: np.random.Generator, items: list, weights: list[float]):
    w = np.asarray(weights, dtype=float)
    return items[int(rng.choice(len(items), p=w / w.sum()))]


def _study_datetime(rng: np.random.Generator, months: list[dt.date], month: int,
                    modality: str) -> dt.datetime:
    first, nxt = months[month], months[month + 1]
    day = first + dt.timedelta(days=int(rng.integers(0, (nxt - first).days)))
    if modality == "CT":
        minute = int(rng.integers(0, 24 * 60))
    else:
        minute = int(rng.integers(8 * 60, 18 * 60))
    return dt.datetime.combine(day, dt.time(minute // 60, minute % 60, int(rng.integers(0, 60))))


def _dose_scale(device: DeviceSpec, de: DeviceExam, month_number: int) -> float:
    scale = de.dose_scale
    for change in device.changes:
        if month_number >= change.from_month:
            scale *= change.dose_scale
    return scale


def _paed_scale(age: float) -> float:
    """Demo only: smaller patients get lower technique (common practice, no source)."""
    if age >= _PAED_AGE:
        return 1.0
    return 0.35 + 0.65 * (age / _PAED_AGE)


# --- CT ----------------------------------------------------------------------------------------

def _ct_events(rng, scenario, seed, index, device, exam, de, start, scale, age) -> list[CtEvent]:
    events = []
    t = start
    study_factor = _lognormal(rng, 1.0, exam.sigma) * scale
    size = 1.0 if age >= _PAED_AGE else 0.55 + 0.45 * age / _PAED_AGE
    for n, ev in enumerate(exam.events):
        kind = ev["kind"]
        if kind == "spiral" and exam.phantom == "head" and device.head_technique == "sequenced":
            kind = "sequenced"
        length = _sig(ev["length"] * size * _lognormal(rng, 1.0, 0.08), 4)
        if kind == "localizer":
            ctdivol = _sig(ev["ctdivol"] * _lognormal(rng, 1.0, 0.1), 3)
            pitch, rotation, single, total = None, None, 0.6, 0.6
            exposure_time = _sig(length / 100.0, 3)  # ~100 mm/s table speed
            ma = 35.0
        elif kind == "stationary":
            ctdivol = _sig(ev["ctdivol"] * _lognormal(rng, 1.0, 0.15), 3)
            pitch, rotation, single, total = None, 0.5, 5.0, 10.0
            length = 10.0
            exposure_time = _sig(float(rng.integers(6, 15)) * 0.5, 3)
            ma = 40.0
        else:
            ctdivol = _sig(ev["ctdivol"] * study_factor * _lognormal(rng, 1.0, 0.05), 4)
            rotation = 1.0 if kind == "sequenced" else (0.5 if exam.phantom == "body" else 0.75)
            single, total = 0.625, 40.0
            pitch = 1.0 if kind == "sequenced" else float(ev.get("pitch", 1.0))
            exposure_time = _sig(length / (total * pitch) * rotation, 4)
            ma = _sig(min(800.0, 6.0 * ctdivol * pitch / rotation
                          * (1.0 if exam.phantom == "body" else 0.45)) + 20.0, 3)
        dlp = _sig(ctdivol * length / 10.0, 5)
        protocol = ev["protocol"]
        if de.protocol and kind not in ("localizer", "stationary"):
            protocol = de.protocol
        omit_dose = kind == "localizer" and device.id == "ovh-ct1"
        events.append(CtEvent(
            event_uid=uid(scenario.uid_namespace, seed, index, "ct-event", n),
            kind=kind,
            protocol=protocol,
            target_region=tuple(exam.target_region),
            phantom="head" if (exam.phantom == "head" and kind != "localizer") else "body",
            started=t,
            kvp=float(ev.get("kvp", 120)),
            tube_current_ma=ma,
            max_tube_current_ma=_sig(ma * 1.3, 3),
            exposure_time_s=exposure_time,
            rotation_time_s=rotation,
            scanning_length_mm=length,
            single_collimation_mm=single,
            total_collimation_mm=total,
            pitch_factor=pitch,
            ctdivol_mgy=None if omit_dose else ctdivol,
            dlp_mgy_cm=None if omit_dose else dlp,
        ))
        t += dt.timedelta(seconds=int(rng.integers(40, 240)))
    return events


# --- projection ------------------------------------------------------------------------------

def _dx_events(rng, scenario, seed, index, device, exam, start, scale, age) -> list[ProjectionEvent]:
    events = []
    t = start
    study_factor = _lognormal(rng, 1.0, exam.sigma) * scale * _paed_scale(age) ** 1.5
    for n, ev in enumerate(exam.events):
        dap = _sig(ev["dap"] * study_factor * _lognormal(rng, 1.0, 0.1), 4)
        sid = float(ev["sid"])
        fw, fh = (x * (0.6 + 0.4 * min(age, _PAED_AGE) / _PAED_AGE) for x in ev["field"])
        area_detector_cm2 = fw * fh / 100.0
        d_rp = sid - 250.0  # patient entrance plane, demo geometry
        area_rp_cm2 = area_detector_cm2 * (d_rp / sid) ** 2
        dose_rp = _sig(dap / area_rp_cm2 * 1000.0, 4)  # Gy.cm2 / cm2 -> Gy -> mGy
        mas = _sig(ev["mas"] * study_factor, 3)
        time_ms = _sig(max(2.0, mas / 0.5), 3)  # ~500 mA generator
        target_ei = 400.0
        ei = _sig(target_ei * _lognormal(rng, 1.0, 0.25), 4)
        di = round(10.0 * math.log10(ei / target_ei), 2)
        events.append(ProjectionEvent(
            event_uid=uid(scenario.uid_namespace, seed, index, "proj-event", n),
            event_type="stationary",
            plane="single",
            protocol=ev["protocol"],
            anatomy=tuple(ev["anatomy"]),
            started=t,
            kvp=float(ev["kvp"]),
            tube_current_ma=_sig(mas / time_ms * 1000.0, 3),
            dap_gy_cm2=dap,
            dose_rp_mgy=dose_rp,
            exposure_time_ms=time_ms,
            exposure_uas=_sig(mas * 1000.0, 4),
            sid_mm=sid,
            field_area_m2=_sig(area_detector_cm2 / 1e4, 4),
            filter_material="Cu",
            filter_thickness_mm=0.1,
            body_part=ev["body_part"],
            view=ev["view"],
            exposure_index=ei,
            target_exposure_index=target_ei,
            deviation_index=di,
        ))
        t += dt.timedelta(seconds=int(rng.integers(30, 180)))
    return events


def _fluoro_events(rng, scenario, seed, index, device, exam, start, scale,
                   special: dict[str, Any] | None) -> list[ProjectionEvent]:
    ev = exam.events[0]
    n_fluoro = int(rng.integers(exam.fluoro_runs[0], exam.fluoro_runs[1] + 1))
    n_acq = int(rng.integers(exam.acquisitions[0], exam.acquisitions[1] + 1))
    factor = _lognormal(rng, 1.0, exam.sigma) * scale
    total_dap = ev["dap"] * factor
    total_fluoro_s = exam.fluoro_time_s * _lognormal(rng, 1.0, exam.sigma)
    rp_per_dap = float(ev["rp_per_dap"])
    if special:
        total_dap = special["dap_total_gy_cm2"]
        total_fluoro_s = special["fluoro_time_s"]
        rp_per_dap = special["dose_rp_total_mgy"] / special["dap_total_gy_cm2"]
    fluoro_w = rng.dirichlet(np.ones(n_fluoro) * 2.0)
    acq_w = rng.dirichlet(np.ones(n_acq) * 3.0)
    fluoro_share = float(ev["fluoro_share"])
    is_xa = exam.modality == "XA"
    kinds = ["fluoroscopy"] * n_fluoro + ["stationary"] * n_acq
    order = rng.permutation(len(kinds))
    events = []
    t = start
    for n, k in enumerate(order):
        is_fluoro = k < n_fluoro
        if is_fluoro:
            dur = max(1.0, round(total_fluoro_s * fluoro_w[k], 1))
            dap = total_dap * fluoro_share * fluoro_w[k]
            rate = 15.0 if is_xa else 7.5
        else:
            j = k - n_fluoro
            dur = round(float(rng.uniform(3.0, 7.0)), 1) if is_xa else 0.1
            dap = total_dap * (1 - fluoro_share) * acq_w[j]
            rate = 15.0 if is_xa else 1.0
        plane = "single"
        if device.biplane:
            plane = "A" if (rng.random() < 0.65) else "B"
        pulses = max(1, int(round(dur * rate))) if (is_fluoro or is_xa) else 1
        dap = _sig(dap, 4)
        events.append(ProjectionEvent(
            event_uid=uid(scenario.uid_namespace, seed, index, "proj-event", n),
            event_type="fluoroscopy" if is_fluoro else "stationary",
            plane=plane,
            protocol=ev["protocol"] + (" fluoro" if is_fluoro else (" cine" if is_xa else " spot")),
            anatomy=tuple(ev["anatomy"]),
            started=t,
            kvp=_sig(float(ev["kvp"]) + rng.normal(0, 4), 3),
            tube_current_ma=_sig(float(rng.uniform(8, 20) if is_fluoro else rng.uniform(300, 700)), 3),
            dap_gy_cm2=dap,
            dose_rp_mgy=_sig(dap * rp_per_dap * _lognormal(rng, 1.0, 0.08), 4),
            irradiation_duration_s=dur,
            pulse_rate_per_s=rate if (is_fluoro or is_xa) else None,
            number_of_pulses=pulses,
            pulse_width_ms=_sig(float(rng.uniform(4, 8)), 3),
            exposure_uas=None if is_fluoro else _sig(float(rng.uniform(300, 700)) * 6.0 * pulses, 4),
            sid_mm=_sig(float(rng.uniform(950, 1150)), 4),
            source_to_isocenter_mm=750.0 if is_xa else 600.0,
            field_area_m2=_sig(float(rng.uniform(0.03, 0.06)), 3),
            primary_angle_deg=round(float(rng.uniform(-40, 40) if plane != "B" else 90.0), 1),
            secondary_angle_deg=round(float(rng.uniform(-30, 30) if plane != "B" else 0.0), 1),
            filter_material="Cu",
            filter_thickness_mm=0.2 if is_fluoro else 0.1,
        ))
        t += dt.timedelta(seconds=int(dur) + int(rng.integers(10, 120)))
    # geometry from its own stream, so the dose draws above stay as they were
    events = _with_geometry(events, _rng(seed, "geometry", index), is_xa)
    if special:
        events = _rescale_fluoro(events, special)
    return events


# Standard cardiac projections as (primary, secondary) in degrees, PS3.3 C.8.7.5 signs
# (+ = LAO / cranial, - = RAO / caudal); the view set is common practice, no source.
_PLANE_A_VIEWS = [(-30.0, -25.0), (-30.0, 30.0), (0.0, 30.0), (45.0, 25.0), (45.0, -30.0),
                  (60.0, 0.0), (0.0, -20.0)]
_PLANE_B_VIEWS = [(90.0, 0.0), (60.0, 20.0), (90.0, -10.0)]


def _with_geometry(events: list[ProjectionEvent], rng: np.random.Generator,
                   is_xa: bool) -> list[ProjectionEvent]:
    """Angulation and table positions per event: a C-arm dwells on one working view during
    fluoroscopy (small jitter) and cycles standard views for cine; a fluoroscopy room keeps
    the tube under the table (0, 0) and follows the contrast down the oesophagus. The
    interventional (XA) rooms report the patient position (supine, head first) in every event;
    the fluoroscopy rooms do not (no random draw either way, so the doses stay as they were)."""
    from dataclasses import replace

    out = []
    work_a = _PLANE_A_VIEWS[int(rng.integers(len(_PLANE_A_VIEWS)))]
    work_b = _PLANE_B_VIEWS[int(rng.integers(len(_PLANE_B_VIEWS)))]
    height = round(float(rng.uniform(-130.0, -90.0)), 0)
    n = len(events)
    for i, e in enumerate(events):
        if is_xa:
            views, work = (_PLANE_B_VIEWS, work_b) if e.plane == "B" else (_PLANE_A_VIEWS, work_a)
            if e.event_type == "fluoroscopy" and rng.random() < 0.7:
                base = work
            else:
                base = views[int(rng.integers(len(views)))]
            primary = round(base[0] + float(rng.normal(0, 2.0)), 1)
            secondary = round(base[1] + float(rng.normal(0, 2.0)), 1)
            longitudinal = round(float(rng.normal(0, 15.0)), 0)
            lateral = round(float(rng.normal(0, 8.0)), 0)
            table_h = round(height + float(rng.normal(0, 5.0)), 0)
        else:
            primary = 0.0 if rng.random() < 0.8 else round(float(rng.choice([-15.0, 15.0])), 1)
            secondary = 0.0
            longitudinal = round(250.0 - 300.0 * i / max(1, n - 1) + float(rng.normal(0, 10.0)), 0)
            lateral = round(float(rng.normal(0, 5.0)), 0)
            table_h = height
        out.append(replace(e, primary_angle_deg=primary, secondary_angle_deg=secondary,
                           table_longitudinal_mm=longitudinal + 0.0, table_lateral_mm=lateral + 0.0,
                           table_height_mm=table_h + 0.0,
                           patient_orientation_modifier="supine" if is_xa else None,
                           patient_table_relationship="headfirst" if is_xa else None))
    return out


def _rescale_fluoro(events: list[ProjectionEvent], special: dict[str, Any]) -> list[ProjectionEvent]:
    """Make the hand-placed case hit its target totals (after rounding, within 0.1 %)."""
    from dataclasses import replace

    dap = sum(e.dap_gy_cm2 for e in events)
    rp = sum(e.dose_rp_mgy for e in events)
    t = sum(e.irradiation_duration_s for e in events if e.event_type == "fluoroscopy")
    out = []
    for e in events:
        kwargs = {
            "dap_gy_cm2": _sig(e.dap_gy_cm2 * special["dap_total_gy_cm2"] / dap, 4),
            "dose_rp_mgy": _sig(e.dose_rp_mgy * special["dose_rp_total_mgy"] / rp, 4),
        }
        if e.event_type == "fluoroscopy":
            kwargs["irradiation_duration_s"] = round(
                e.irradiation_duration_s * special["fluoro_time_s"] / t, 1)
        out.append(replace(e, **kwargs))
    return out


def _mg_events(rng, scenario, seed, index, device, exam, start, scale) -> list[ProjectionEvent]:
    events = []
    t = start
    anode, filt = device.target_filter or ("W", "Rh")
    study_factor = _lognormal(rng, 1.0, exam.sigma) * scale
    thickness = {side: float(np.clip(rng.normal(55.0, 12.0), 22.0, 95.0)) for side in "LR"}
    # Compression force has its own stream so that adding it left every other draw as it was.
    # Demo numbers only (no source): about 110 N, 50-200 N.
    force_rng = _rng(seed, "mg-compression-force", index)
    for n, ev in enumerate(exam.events):
        side = ev["laterality"]
        th = round(thickness[side] + (4.0 if ev["view"] == "MLO" else 0.0), 0)
        agd = _sig(ev["agd"] * study_factor * math.exp(0.012 * (th - 55.0))
                   * _lognormal(rng, 1.0, 0.05) * (1.1 if anode == "Mo" else 1.0), 3)
        kvp = float(round(25 + th / 10.0)) if anode == "Mo" else float(round(26 + th / 10.0))
        events.append(ProjectionEvent(
            event_uid=uid(scenario.uid_namespace, seed, index, "proj-event", n),
            event_type="stationary",
            plane="single",
            protocol=ev["protocol"],
            anatomy=("76752008", "SCT", "Breast"),
            started=t,
            kvp=kvp,
            tube_current_ma=_sig(float(rng.uniform(80, 160)), 3),
            dap_gy_cm2=None,
            dose_rp_mgy=None,
            exposure_time_ms=_sig(float(rng.uniform(600, 1600)), 3),
            exposure_uas=_sig(float(rng.uniform(60, 180)) * 1000.0, 4),
            sid_mm=650.0,
            filter_material={"Rh": "Rh", "Mo": "Mo", "Ag": "Ag", "Al": "Al"}[filt],
            filter_thickness_mm=0.05 if filt == "Rh" else 0.03,
            body_part="BREAST",
            view=ev["view"],
            laterality=side,
            agd_mgy=agd,
            entrance_exposure_mgy=_sig(agd * (3.2 + th / 25.0), 3),
            compressed_thickness_mm=th,
            compression_force_n=float(round(np.clip(force_rng.normal(110.0, 25.0), 50.0, 200.0))),
            hvl_mm=_sig(0.30 + kvp / 100.0 * (0.6 if anode == "W" else 0.45), 3),
            anode=anode,
        ))
        t += dt.timedelta(seconds=int(rng.integers(40, 120)))
    return events


# --- the study ------------------------------------------------------------------------------

def make_study(scenario: Scenario, seed: int, index: int, n_studies: int,
               months: int) -> StudySpec:
    """Draw study number `index` of a corpus of `n_studies` over `months` months.

    Pure: the same arguments always give the same study.
    """
    rng = _rng(seed, "study", index)
    special_key, special = _special_at(scenario, index, n_studies)
    if special:
        device = scenario.device(special["device"])
        de = next(x for x in device.exams if x.exam == special["exam"])
    else:
        device = _pick(rng, list(scenario.devices), [d.share for d in scenario.devices])
        de = _pick(rng, list(device.exams), [x.share for x in device.exams])
        # a separate stream, so that adding unmapped descriptions leaves every other draw as it was
        other = _rng(seed, "unmapped", index)
        if device.unmapped and other.random() < scenario.unmapped_share:
            de = _pick(other, list(device.unmapped), [x.share for x in device.unmapped])
    exam = scenario.exams[de.exam]
    month = min(months - 1, index * months // max(1, n_studies))
    starts = month_starts(scenario.start_date, months)
    when = _study_datetime(rng, starts, month, exam.modality)

    paediatric = exam.modality in ("CT", "DX", "CR") and rng.random() < scenario.paediatric_share
    pool = _pool_for(exam, paediatric)
    pool_size = max(1, int(n_studies * scenario.patient_pool_fraction * _POOL_SHARE[pool]))
    patient = _patient(scenario, seed, pool, int(rng.integers(0, pool_size)), when.date())
    age = _age_years(patient.birth_date, when.date())
    scale = _dose_scale(device, de, month + 1)

    ct: list[CtEvent] = []
    proj: list[ProjectionEvent] = []
    if exam.modality == "CT":
        ct = _ct_events(rng, scenario, seed, index, device, exam, de, when, scale, age)
    elif exam.modality in ("DX", "CR"):
        proj = _dx_events(rng, scenario, seed, index, device, exam, when, scale, age)
    elif exam.modality in ("RF", "XA"):
        proj = _fluoro_events(rng, scenario, seed, index, device, exam, when, scale, special)
    elif exam.modality == "MG":
        proj = _mg_events(rng, scenario, seed, index, device, exam, when, scale)
    else:  # pragma: no cover - the scenario loader admits only the modalities above
        raise ValueError(f"exam {exam.id!r}: unsupported modality {exam.modality!r}")
    n_events = len(ct) or len(proj)
    last = (ct or proj)[-1].started

    reports = []
    if device.reports == "rdsr":
        cumulative = device.cumulative_reports > 0 and n_events > 1 and \
            rng.random() < device.cumulative_reports
        cuts = [max(1, n_events // 2), n_events] if cumulative else [n_events]
        for number, cut in enumerate(cuts, start=1):
            reports.append(ReportSpec(
                kind="rdsr", n_events=cut,
                sop_instance_uid=uid(scenario.uid_namespace, seed, index, "rdsr", number),
                series_instance_uid=uid(scenario.uid_namespace, seed, index, "rdsr-series"),
                instance_number=number,
                content_time=(ct or proj)[cut - 1].started + dt.timedelta(minutes=2),
            ))
    elif device.reports == "dose_screen":
        reports.append(ReportSpec(
            kind="dose_screen", n_events=n_events,
            sop_instance_uid=uid(scenario.uid_namespace, seed, index, "dose-screen", 1),
            series_instance_uid=uid(scenario.uid_namespace, seed, index, "dose-screen-series"),
            instance_number=1,
            content_time=last + dt.timedelta(minutes=2),
        ))
    else:
        for number in range(1, n_events + 1):
            reports.append(ReportSpec(
                kind="image_header", n_events=number,
                sop_instance_uid=uid(scenario.uid_namespace, seed, index, "image", number),
                series_instance_uid=uid(scenario.uid_namespace, seed, index, "series", number),
                instance_number=1,
                content_time=proj[number - 1].started,
            ))

    if device.header_images:
        reports += _header_image_reports(scenario, seed, index, ct, proj)

    de_description = de.description or exam.study_description
    story = special_key
    if device.changes and any(month + 1 >= c.from_month for c in device.changes):
        story = story or "after_step_change"
    if de.dose_scale != 1.0:
        story = story or "high_protocol"
    if sum(r.kind == "rdsr" for r in reports) > 1:
        story = story or "cumulative_reports"
    return StudySpec(
        index=index,
        study_uid=uid(scenario.uid_namespace, seed, index, "study"),
        accession=f"ACC{seed:02d}{index:08d}"[:16],
        study_datetime=when,
        site=device.site,
        device=device.id,
        modality=device.modality,
        exam=exam.id,
        study_description=de_description,
        patient=patient,
        age_years=age,
        ct_events=tuple(ct),
        projection_events=tuple(proj),
        reports=tuple(reports),
        story=story,
        notes={"last_event": last.isoformat()},
    )


def _header_image_reports(scenario: Scenario, seed: int, index: int, ct: list[CtEvent],
                          proj: list[ProjectionEvent]) -> list[ReportSpec]:
    """Image headers a unit sends beside its RDSR (``header_images``), after the RDSRs.

    CT: one representative image per non-localizer acquisition, each acquisition its own
    series, all in one Frame of Reference (one patient on one table). Mammography: one image
    per view, the views of a study in one series. No random draws: only UIDs and times.
    """
    ns = scenario.uid_namespace
    out = []
    if ct:
        frame = uid(ns, seed, index, "frame-of-reference")
        for number, e in enumerate(ct, start=1):
            if e.kind == "localizer":
                continue
            out.append(ReportSpec(
                kind="image_header", n_events=number,
                sop_instance_uid=uid(ns, seed, index, "image", number),
                series_instance_uid=uid(ns, seed, index, "series", number),
                instance_number=1, content_time=e.started, frame_of_reference_uid=frame))
    else:
        series = uid(ns, seed, index, "image-series")
        for number, e in enumerate(proj, start=1):
            out.append(ReportSpec(
                kind="image_header", n_events=number,
                sop_instance_uid=uid(ns, seed, index, "image", number),
                series_instance_uid=series, instance_number=number, content_time=e.started))
    return out


_POOL_SHARE = {"adult": 0.7, "child": 0.05, "breast": 0.17, "cardiac": 0.05}


def _special_at(scenario: Scenario, index: int, n_studies: int):
    """Hand-placed studies sit at fixed fractions of the corpus (so any size has them)."""
    for position, (key, spec) in enumerate(sorted(scenario.special.items())):
        if index == (n_studies * (position + 1)) // (len(scenario.special) + 2):
            return key, spec
    return None, None
