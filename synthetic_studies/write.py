"""Write a synthetic corpus to disk with its ground-truth manifest (the shell of the generator).

Output folder layout::

    OUT/
      TGH/tgh-ct1/2026-09/s000123/rdsr_1.dcm     one folder per study: its dose objects,
      TGH/tgh-ct1/2026-09/s000123/rdsr_1.resent.dcm  and any file defects placed beside them
      CIC/cic-ct1/2026-09/s000125/dose_screen_1.dcm  a CT dose screen (Secondary Capture)
      OVH/ovh-ct1/2026-09/s000124/img_2.dcm       header images (n = event number); beside the
                                                  RDSR for units with header_images
      ...
      files.parquet                               one row per file
      studies.parquet                             one row per study, true totals

Deterministic: the same scenario, seed, months and study count give byte-identical files
whatever the number of worker processes.
"""

from __future__ import annotations

import multiprocessing
import os
import threading
import time
from collections.abc import Callable
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import numpy as np
import pydicom.config

from .defects import CONTENT_DEFECTS, FILE_DEFECTS, apply_content_defect, is_eligible
from .encoder import encode as _encode
from .generator import make_basic_text_sr, make_dataset, make_parts
from .sampling import _rng, device_observer_uid, make_study, uid
from .scenario import Scenario, load_scenario
from .specs import StudySpec, study_truth

__all__ = ["CorpusSummary", "FILES_SCHEMA", "STUDIES_SCHEMA", "plan_defects", "write_corpus"]

FILES_SCHEMA = pa.schema([
    ("path", pa.string()),
    ("sop_class_uid", pa.string()),
    ("sop_instance_uid", pa.string()),
    ("study", pa.string()),
    ("kind", pa.string()),
    ("defect", pa.string()),
    ("n_events", pa.int32()),
    ("size_bytes", pa.int64()),
    ("irradiation_event_uid", pa.string()),
])

STUDIES_SCHEMA = pa.schema([
    ("study", pa.string()),
    ("study_instance_uid", pa.string()),
    ("site", pa.string()),
    ("institution", pa.string()),
    ("device", pa.string()),
    ("device_observer_uid", pa.string()),
    ("station_name", pa.string()),
    ("modality", pa.string()),
    ("exam", pa.string()),
    ("is_unmapped", pa.bool_()),   # by design no default exam rule maps its description
    ("study_description", pa.string()),
    ("study_datetime", pa.timestamp("s")),
    ("patient_id", pa.string()),
    ("patient_sex", pa.string()),
    ("patient_age_years", pa.float64()),
    ("patient_weight_kg", pa.float64()),
    ("patient_height_m", pa.float64()),
    ("source_kind", pa.string()),
    ("n_reports", pa.int32()),
    ("event_count", pa.int32()),
    ("dap_total_gy_cm2", pa.float64()),
    ("dose_rp_total_mgy", pa.float64()),
    ("fluoro_time_total_s", pa.float64()),
    ("dlp_total_mgy_cm", pa.float64()),
    ("ctdivol_mgy", pa.float64()),
    ("agd_mgy", pa.float64()),
    ("entrance_dose_total_mgy", pa.float64()),
    ("story", pa.string()),
    ("defect", pa.string()),
    ("n_header_images", pa.int32()),
])


@dataclass(frozen=True, slots=True)
class CorpusSummary:
    out_dir: Path
    n_studies: int
    n_files: int
    n_defect_files: int
    by_modality: dict[str, int]
    size_bytes: int


def _study_id(index: int) -> str:
    return f"s{index:06d}"


def _study_dir(spec: StudySpec) -> str:
    return f"{spec.site}/{spec.device}/{spec.study_datetime:%Y-%m}/{_study_id(spec.index)}"


def plan_defects(scenario: Scenario, seed: int, n_studies: int, months: int) -> dict[int, list[str]]:
    """Which study carries which defect: deterministic from the seed; at least one of each."""
    plan: dict[int, list[str]] = {}
    taken_content: set[int] = set()
    for defect in (*CONTENT_DEFECTS, *FILE_DEFECTS):
        want = max(1, scenario.defects.get(defect, 1))
        rng = _rng(seed, "defect", defect)
        got, tries = 0, 0
        while got < want and tries < 50 * n_studies:
            tries += 1
            index = int(rng.integers(0, n_studies))
            if defect in CONTENT_DEFECTS and index in taken_content:
                continue
            if index in plan and defect in plan[index]:
                continue
            if not is_eligible(defect, make_study(scenario, seed, index, n_studies, months)):
                continue
            plan.setdefault(index, []).append(defect)
            if defect in CONTENT_DEFECTS:
                taken_content.add(index)
            got += 1
    return plan



def _write_bytes(root: Path, rel: str, data: bytes) -> None:
    """Write one file (its study's folder is made before the first)."""
    with open(root / rel, "wb") as f:
        f.write(data)


def _write_study(scenario: Scenario, seed: int, index: int, n_studies: int, months: int,
                 defects: list[str], root: Path) -> tuple[list[dict], dict]:
    spec = make_study(scenario, seed, index, n_studies, months)
    folder = _study_dir(spec)
    (root / folder).mkdir(parents=True, exist_ok=True)
    sid = _study_id(index)
    content_defect = next((d for d in defects if d in CONTENT_DEFECTS), None)
    files: list[dict] = []
    for report in spec.reports:
        defect = None
        if content_defect and report.kind == "rdsr" and report.instance_number == 1:
            ds = make_dataset(scenario, spec, report)  # spoilt as a whole Dataset
            apply_content_defect(ds, content_defect)
            defect = content_defect
            data = _encode(ds)
        else:
            ds, content = make_parts(scenario, spec, report)
            data = _encode(ds, content)
        name = f"rdsr_{report.instance_number}.dcm" if report.kind == "rdsr" \
            else f"dose_screen_{report.instance_number}.dcm" if report.kind == "dose_screen" \
            else f"img_{report.n_events}.dcm"
        rel = f"{folder}/{name}"
        _write_bytes(root, rel, data)
        files.append(_file_row(rel, ds.SOPClassUID, ds.SOPInstanceUID, sid, report.kind,
                               defect, report.n_events, len(data),
                               ds.get("IrradiationEventUID")))
        if report.kind == "rdsr" and report.instance_number == 1:
            first, first_ds = data, ds
    if "truncated" in defects:
        rel = f"{folder}/rdsr_1.partial.dcm"
        cut = first[: len(first) * 2 // 3]
        _write_bytes(root, rel, cut)
        files.append(_file_row(rel, first_ds.SOPClassUID, first_ds.SOPInstanceUID, sid,
                               "rdsr", "truncated", None, len(cut)))
    if "duplicate_copy" in defects:
        rel = f"{folder}/rdsr_1.resent.dcm"
        _write_bytes(root, rel, first)
        first_rdsr = next(r for r in spec.reports if r.kind == "rdsr")
        files.append(_file_row(rel, first_ds.SOPClassUID, first_ds.SOPInstanceUID, sid,
                               "rdsr", "duplicate_copy", first_rdsr.n_events, len(first)))
    if "not_dose_sr" in defects:
        note_uid = uid(scenario.uid_namespace, seed, index, "note")
        ds = make_basic_text_sr(scenario, spec, note_uid)
        data = _encode(ds)
        rel = f"{folder}/note_1.dcm"
        _write_bytes(root, rel, data)
        files.append(_file_row(rel, ds.SOPClassUID, note_uid, sid, "other", "not_dose_sr",
                               None, len(data)))
    if "not_dicom" in defects:
        rel = f"{folder}/dose_screen.dcm"
        data = (f"Dose summary for study {sid}: exported as text by mistake.\n"
                "This file is not DICOM.\n").encode()
        _write_bytes(root, rel, data)
        files.append(_file_row(rel, None, None, sid, "other", "not_dicom", None, len(data)))
    return files, _study_row(scenario, spec, content_defect)


def _file_row(path, sop_class, sop_instance, study, kind, defect, n_events, size,
              event_uid=None) -> dict:
    """One files.parquet row. ``n_events``: events an RDSR covers, or the 1-based event
    number an image header shows; ``irradiation_event_uid``: an image's (0008,3010)."""
    return {"path": path, "sop_class_uid": None if sop_class is None else str(sop_class),
            "sop_instance_uid": None if sop_instance is None else str(sop_instance),
            "study": study, "kind": kind, "defect": defect, "n_events": n_events,
            "size_bytes": size,
            "irradiation_event_uid": None if event_uid is None else str(event_uid)}


def _study_row(scenario: Scenario, spec: StudySpec, defect: str | None) -> dict:
    """One studies.parquet row.

    ``source_kind`` is "rdsr" when the study has a dose report (even if header images sit
    beside it), "dose_screen" for a unit that sends a dose screen, else "image_header";
    ``n_reports`` counts the objects of that kind (RDSRs, dose screens or the header-only
    images); ``n_header_images`` counts all image headers.
    """
    device = scenario.device(spec.device)
    p = spec.patient
    kinds = [r.kind for r in spec.reports]
    source_kind = "rdsr" if "rdsr" in kinds else \
        "dose_screen" if "dose_screen" in kinds else "image_header"
    return {
        "study": _study_id(spec.index),
        "study_instance_uid": spec.study_uid,
        "site": spec.site,
        "institution": scenario.sites[spec.site].institution,
        "device": spec.device,
        "device_observer_uid": device_observer_uid(scenario, spec.device),
        "station_name": device.station_name,
        "modality": spec.modality,
        "exam": spec.exam,
        "is_unmapped": scenario.exams[spec.exam].unmapped,
        "study_description": spec.study_description,
        "study_datetime": spec.study_datetime,
        "patient_id": p.patient_id,
        "patient_sex": p.sex,
        "patient_age_years": spec.age_years,
        "patient_weight_kg": p.weight_kg,
        "patient_height_m": p.height_m,
        "source_kind": source_kind,
        "n_reports": kinds.count(source_kind),
        **study_truth(spec),
        "story": spec.story,
        "defect": defect,
        "n_header_images": kinds.count("image_header"),
    }


@contextmanager
def _strict_writing():
    """Write with pydicom's RAISE validation: the generator never writes an invalid value,
    whatever the calling process has configured (spawned workers start from defaults)."""
    settings = pydicom.config.settings
    before = settings.writing_validation_mode
    settings.writing_validation_mode = pydicom.config.RAISE
    try:
        yield
    finally:
        settings.writing_validation_mode = before


_SCENARIOS: dict[tuple | None, Scenario] = {}


def _scenario(path: Path | str | None) -> Scenario:
    """load_scenario, once per process and version of the file (parsing takes some 7 ms;
    every chunk of studies needs the scenario)."""
    key = None
    if path is not None:
        stat = os.stat(path)
        key = (str(Path(path).resolve()), stat.st_mtime_ns, stat.st_size)
    found = _SCENARIOS.get(key)
    if found is None:
        found = _SCENARIOS[key] = load_scenario(path)
    return found


def _write_chunk(args) -> tuple[list[dict], list[dict]]:
    scenario_path, seed, indices, n_studies, months, plan, root = args
    scenario = _scenario(scenario_path)
    files, studies = [], []
    with _strict_writing():
        for index in indices:
            f, s = _write_study(scenario, seed, index, n_studies, months,
                                plan.get(index, []), root)
            files += f
            studies.append(s)
    return files, studies


def _prepare_arrow() -> None:
    """Have pyarrow load now what its first conversion of Python values loads (it imports
    pandas, some 0.3 s): while helper processes start, not after the last study."""
    pa.array([0])


# CPU seconds a spawned helper process spends before its first study (importing numpy,
# pydicom and pyarrow, then its first encodings): measured 0.5 s on the 2-core machine.
HELPER_START_CPU_S = 0.5


def _run_jobs(jobs: list[tuple], workers: int,
              meanwhile: Callable[[], None] | None = None) -> list:
    """`_write_chunk` of every job on at most `workers` processes, this one among them;
    results in job order. `meanwhile`: work for this process while the helpers start.

    This process has imported everything already; a spawned helper costs about
    HELPER_START_CPU_S before it writes anything. So this process writes the first chunk
    and measures it (CPU time: the same on a busy machine); helpers are started only if the
    chunks left would take more than twice that start (then a helper saves wall time on
    free cores, and on a machine whose cores are all busy its start costs at most half of
    the CPU time of the work left). While they
    start this process goes on with the jobs, and a feeder thread hands each helper its next
    job as soon as it returns the last. Jobs are taken in order from one shared counter, so
    none is done twice and the output is the same whichever process wrote which study.
    """
    if workers == 1 or len(jobs) == 1:
        return [_write_chunk(job) for job in jobs]
    started = time.process_time()
    first = _write_chunk(jobs[0])
    left_cpu_s = (time.process_time() - started) * (len(jobs) - 1)
    if left_cpu_s <= 2 * HELPER_START_CPU_S:
        return [first, *(_write_chunk(job) for job in jobs[1:])]
    results: list = [first, *([None] * (len(jobs) - 1))]
    order = iter(range(1, len(jobs)))
    lock = threading.Lock()
    failed: list[BaseException] = []

    def take() -> int | None:
        with lock:
            return None if failed else next(order, None)

    def feed(pool: ProcessPoolExecutor) -> None:
        try:
            running: dict = {}
            while True:
                while len(running) < workers - 1 and (i := take()) is not None:
                    running[pool.submit(_write_chunk, jobs[i])] = i
                if not running:
                    return
                done, _ = wait(running, return_when=FIRST_COMPLETED)
                for future in done:
                    results[running.pop(future)] = future.result()
        except BaseException as error:  # handed on to the caller
            failed.append(error)

    # "spawn", not the Linux default "fork": a forked child inherits the caller's native
    # library state (e.g. an open DuckDB connection and its threads) and can crash on it.
    # Helpers need nothing from this process but their picklable job tuple.
    with ProcessPoolExecutor(max_workers=workers - 1,
                             mp_context=multiprocessing.get_context("spawn")) as pool:
        feeder = threading.Thread(target=feed, args=(pool,), name="corpus-feeder")
        feeder.start()
        try:
            if meanwhile is not None:
                meanwhile()
            while (i := take()) is not None:
                results[i] = _write_chunk(jobs[i])
        except BaseException as error:
            failed.append(error)
        finally:
            feeder.join()
    if failed:
        raise failed[0]
    return results


def write_corpus(out_dir: Path | str, *, seed: int = 7, months: int = 3, n_studies: int = 2000,
                 scenario_path: Path | str | None = None, workers: int | None = None) -> CorpusSummary:
    """Generate the corpus and its manifest under `out_dir`.

    Parameters
    ----------
    out_dir : folder to write (created; existing files with the same names are replaced)
    seed, months, n_studies : what to draw; the same values give byte-identical output
    scenario_path : a scenario TOML file; default the bundled demo network
    workers : processes to use at most, this one included (default: CPU count, at most 8);
        helpers are started only for work that outweighs their start (see _run_jobs)
    """
    if n_studies < 1 or months < 1:
        raise ValueError("need at least one study and one month")
    root = Path(out_dir)
    root.mkdir(parents=True, exist_ok=True)
    scenario = _scenario(scenario_path)
    plan = plan_defects(scenario, seed, n_studies, months)
    workers = workers or min(8, os.cpu_count() or 1)
    chunk = max(25, n_studies // (workers * 8) or 1)
    jobs = [(scenario_path, seed, list(range(i, min(i + chunk, n_studies))), n_studies, months,
             plan, root) for i in range(0, n_studies, chunk)]
    results = _run_jobs(jobs, workers, meanwhile=_prepare_arrow)
    files, studies = [], []
    for f, s in results:
        files += f
        studies += s
    files.sort(key=lambda r: r["path"])
    pq.write_table(pa.Table.from_pylist(files, schema=FILES_SCHEMA), root / "files.parquet")
    pq.write_table(pa.Table.from_pylist(studies, schema=STUDIES_SCHEMA), root / "studies.parquet")
    modalities = np.unique([s["modality"] for s in studies], return_counts=True)
    return CorpusSummary(
        out_dir=root,
        n_studies=len(studies),
        n_files=len(files),
        n_defect_files=sum(1 for f in files if f["defect"]),
        by_modality={str(k): int(v) for k, v in zip(*modalities)},
        size_bytes=sum(f["size_bytes"] for f in files),
    )
