"""Peak-skin-dose model speed: the per-event projection against the block projection (on demand).

    .venv/bin/python bench/skin_dose.py                  # the demo corpus's RF/XA studies
    .venv/bin/python bench/skin_dose.py --repeat 3 --studies 4000

The studies are drawn with the demo's generator (synthetic_studies, seed 7, 3 months, 2000
studies: 179 RF/XA studies, 3457 events) without writing DICOM; each event goes to
`SkinDoseEvent` the way `pipeline.audit.skin_dose_rows` maps a warehouse row. "before" is
`reference_compute_skin_dose` (tests/pipeline/skin_dose_reference.py: the loop as it was, one
event at a time over every cell), "after" is `pipeline.skin_dose.compute_skin_dose`; both run on
the same studies in the same process, alternately study by study, each study timed as the
best of --repeat runs (the sums of those are the two times). The outputs are compared (dose
maps, PSD, method text, per-event factors; 1e-12 relative) before the last line:

    skin dose: before X ms/event, after Y ms/event (Z x), N events in S studies
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))


def demo_studies(n_studies: int, seed: int,
                 months: int) -> list[tuple[list, float | None, float | None]]:
    """(events, height_m, weight_kg) of each RF/XA study of a generated corpus."""
    from pipeline import concepts as C
    from pipeline.metrics.skin import _added_cu_mm
    from pipeline.skin_dose import SkinDoseEvent
    from synthetic_studies.sampling import make_study
    from synthetic_studies.scenario import load_scenario

    scenario = load_scenario()
    rp = {"XA": C.RP_15CM_FROM_ISOCENTER.meaning, "RF": C.RP_1CM_ABOVE_TABLETOP.meaning}
    out = []
    for index in range(n_studies):
        spec = make_study(scenario, seed, index, n_studies, months)
        if spec.modality not in rp:
            continue
        events = [SkinDoseEvent(
            dose_rp_mgy=float(e.dose_rp_mgy), kvp=e.kvp, primary_angle_deg=e.primary_angle_deg,
            secondary_angle_deg=e.secondary_angle_deg,
            source_to_isocenter_mm=e.source_to_isocenter_mm, source_to_detector_mm=e.sid_mm,
            field_area_cm2=e.field_area_m2 * 1e4 if e.field_area_m2 is not None else None,
            table_longitudinal_mm=e.table_longitudinal_mm, table_lateral_mm=e.table_lateral_mm,
            table_height_mm=e.table_height_mm, reference_point_definition=rp[spec.modality],
            added_cu_mm=_added_cu_mm(e.filter_material, e.filter_thickness_mm),
            patient_orientation_modifier=e.patient_orientation_modifier,
            patient_table_relationship=e.patient_table_relationship)
            for e in spec.projection_events if e.dose_rp_mgy is not None]
        out.append((events, spec.patient.height_m, spec.patient.weight_kg))
    return out


def _timed(fn, study, repeat: int) -> tuple[float, object]:
    """Best of `repeat` runs on one study (a shared machine: the best is the least disturbed)."""
    events, height, weight = study
    best = math.inf
    for _ in range(repeat):
        started = time.perf_counter()
        result = fn(events, height_m=height, weight_kg=weight)
        best = min(best, time.perf_counter() - started)
    return best, result


def _differences(before, after) -> list[str]:
    import numpy as np

    def close(a, b) -> bool:
        return a == b or math.isclose(a, b, rel_tol=1e-12, abs_tol=0.0)

    out = []
    for k, (r, q) in enumerate(zip(before, after, strict=True)):
        if not (np.array_equal(r.dose_map_mgy > 0, q.dose_map_mgy > 0)
                and np.allclose(q.dose_map_mgy, r.dose_map_mgy, rtol=1e-12, atol=0.0)):
            out.append(f"study {k}: dose map")
        if not close(r.psd_mgy, q.psd_mgy) or r.method != q.method or r.factors != q.factors:
            out.append(f"study {k}: PSD, method or factor sources")
        for a, b in zip(r.event_factors, q.event_factors, strict=True):
            if a.keys() != b.keys() or any(
                    not close(a[key], b[key]) if isinstance(a[key], float) else a[key] != b[key]
                    for key in a):
                out.append(f"study {k}: per-event factors")
                break
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--studies", type=int, default=2000, help="corpus size (the demo's: 2000)")
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--months", type=int, default=3)
    parser.add_argument("--repeat", type=int, default=1, help="runs per study; the best is kept")
    args = parser.parse_args(argv)

    from pipeline.skin_dose import compute_skin_dose
    from tests.pipeline.skin_dose_reference import reference_compute_skin_dose

    studies = demo_studies(args.studies, args.seed, args.months)
    n_events = sum(len(events) for events, _, _ in studies)
    compute_skin_dose(*studies[0][:1])           # imports, caches of the backscatter table
    reference_compute_skin_dose(*studies[0][:1])
    before_s = after_s = 0.0
    before, after = [], []
    for study in studies:   # alternately, study by study, so that both see the same load
        seconds, result = _timed(reference_compute_skin_dose, study, args.repeat)
        before_s += seconds
        before.append(result)
        seconds, result = _timed(compute_skin_dose, study, args.repeat)
        after_s += seconds
        after.append(result)
    differences = _differences(before, after)
    for line in differences[:20]:
        print("DIFFERENT:", line)
    print(f"outputs: {'identical to 1e-12' if not differences else f'{len(differences)} differ'}")
    print(f"skin dose: before {before_s / n_events * 1e3:.3f} ms/event, after "
          f"{after_s / n_events * 1e3:.3f} ms/event ({before_s / after_s:.1f} x), "
          f"{n_events} events in {len(studies)} studies")
    return 1 if differences else 0


if __name__ == "__main__":
    raise SystemExit(main())
