"""The block projection of pipeline/skin_dose.py against the per-event projection it replaced.

Check values: `reference_compute_skin_dose` (tests/pipeline/skin_dose_reference.py), the loop
of pipeline/skin_dose.py before the change, one event at a time over every cell of the phantom
(no published source: the two implementations of one method must agree). The events are
random but seeded; outputs must agree to 1e-12 relative: the dose map (and which of its cells
are non-zero), the PSD, the per-event factors, the method text and the factor sources.
"""

import math

import numpy as np
import pytest

import pipeline.skin_dose as skin_dose
from pipeline.skin_dose import SkinDoseEvent, SkinDoseSettings, compute_skin_dose

from .skin_dose_reference import reference_compute_skin_dose

RTOL = 1e-12
ORIENTATIONS = [None, "supine", "prone", "left lateral decubitus", "right lateral decubitus",
                "Prone", "sitting"]
RELATIONSHIPS = [None, "headfirst", "feet-first", "feet first", "left first"]
RP_DEFINITIONS = [None, "15cm from Isocenter toward Source", "1cm above Tabletop"]


def _maybe(rng, p_none: float, value):
    return None if rng.random() < p_none else value


def _random_event(rng: np.random.Generator) -> SkinDoseEvent:
    """One event: geometry often missing or odd, beams from any side, table under or not."""
    kind = rng.random()
    if kind < 0.25:     # C-arm round the patient, any angle, table anywhere near
        primary = float(rng.uniform(-180, 180))
        secondary = float(rng.uniform(-45, 45))
    elif kind < 0.45:   # the round angles and table positions of real rooms (cell boundaries)
        primary = float(rng.choice([0.0, 90.0, -90.0, 180.0, 30.0, -45.0]))
        secondary = float(rng.choice([0.0, 0.0, 20.0, -25.0]))
    elif kind < 0.5:    # nearly along the table: the other reference axis for u
        primary = float(rng.uniform(-30, 30))
        secondary = float(rng.choice([-1, 1]) * rng.uniform(82, 90))
    else:               # under-table tube, PA-ish (through the table top)
        primary = float(rng.normal(0, 10))
        secondary = float(rng.normal(0, 8))
    round_table = kind >= 0.25 and kind < 0.45
    table = (lambda sd: float(round(rng.normal(0, sd)))) if round_table else \
        (lambda sd: float(rng.normal(0, sd)))
    miss = rng.random() < 0.08      # table moved far: the beam misses the phantom
    field = float(rng.choice([rng.uniform(0.5, 4.0), rng.uniform(100, 600), rng.uniform(900, 2500)],
                             p=[0.1, 0.8, 0.1]))
    return SkinDoseEvent(
        dose_rp_mgy=float(rng.lognormal(2.0, 1.0)),
        kvp=_maybe(rng, 0.15, float(rng.uniform(50, 130))),
        primary_angle_deg=_maybe(rng, 0.08, primary),
        secondary_angle_deg=_maybe(rng, 0.04, secondary),
        source_to_isocenter_mm=_maybe(rng, 0.05,
                                      float(rng.choice([600.0, 750.0, rng.uniform(500, 900)]))),
        source_to_detector_mm=_maybe(rng, 0.2, float(rng.uniform(900, 1300))),
        source_to_rp_mm=_maybe(rng, 0.85, float(rng.uniform(500, 700))),
        field_area_cm2=_maybe(rng, 0.1, field),
        table_longitudinal_mm=_maybe(rng, 0.1, 2500.0 if miss else table(250)),
        table_lateral_mm=_maybe(rng, 0.1,
                                table(30) + (900.0 if miss and rng.random() < 0.5 else 0.0)),
        table_height_mm=_maybe(rng, 0.15, float(round(rng.uniform(-260, 60))) if round_table
                               else float(rng.uniform(-260, 60))),
        reference_point_definition=RP_DEFINITIONS[int(rng.integers(len(RP_DEFINITIONS)))],
        added_cu_mm=_maybe(rng, 0.25, float(rng.choice([0.0, 0.1, 0.2, rng.uniform(0, 1.2)]))),
        patient_orientation_modifier=ORIENTATIONS[int(rng.integers(len(ORIENTATIONS)))],
        patient_table_relationship=RELATIONSHIPS[int(rng.integers(len(RELATIONSHIPS)))])


def _studies(seed: int, sizes: list[int]):
    rng = np.random.default_rng(seed)
    out = []
    for n in sizes:
        height = _maybe(rng, 0.4, float(rng.uniform(0.5, 2.0)))
        weight = _maybe(rng, 0.3, float(rng.uniform(5, 140)))
        out.append(([_random_event(rng) for _ in range(n)], height, weight))
    return out


def _same_number(a, b) -> bool:
    return a == b or math.isclose(a, b, rel_tol=RTOL, abs_tol=0.0)


def _assert_same(new, ref) -> None:
    """Everything the caller reads, to 1e-12 relative (strings and flags exactly)."""
    assert new.dose_map_mgy.shape == ref.dose_map_mgy.shape
    assert np.array_equal(new.dose_map_mgy > 0, ref.dose_map_mgy > 0)
    np.testing.assert_allclose(new.dose_map_mgy, ref.dose_map_mgy, rtol=RTOL, atol=0.0)
    assert _same_number(new.psd_mgy, ref.psd_mgy)
    assert np.array_equal(new.around_mm, ref.around_mm)
    assert np.array_equal(new.along_mm, ref.along_mm)
    assert (new.n_events, new.n_events_with_geometry, new.phantom) == \
        (ref.n_events, ref.n_events_with_geometry, ref.phantom)
    assert _same_number(new.ka_r_total_mgy, ref.ka_r_total_mgy)
    assert _same_number(new.upper_bound_part_mgy, ref.upper_bound_part_mgy)
    assert new.method == ref.method
    assert new.factors == ref.factors
    assert len(new.event_factors) == len(ref.event_factors)
    for mine, theirs in zip(new.event_factors, ref.event_factors, strict=True):
        assert mine.keys() == theirs.keys()
        for key, value in theirs.items():
            if isinstance(value, float) and not isinstance(value, bool):
                assert _same_number(mine[key], value), (key, mine[key], value)
            else:
                assert mine[key] == value, key


def _coverage(results) -> dict[str, int]:
    """How many events of each kind the random studies held (guards against an idle test)."""
    factors = [f for r in results for f in r.event_factors]
    return {"no_geometry": sum(not f["has_geometry"] for f in factors),
            "missed": sum(f.get("hit") is False for f in factors),
            "through_table": sum(f.get("table_transmission", 1.0) < 1.0 for f in factors),
            "hit": sum(bool(f.get("hit")) for f in factors),
            "prone": sum("prone" in r.method for r in results),
            "feet_first": sum("feet-first" in r.method for r in results),
            "decubitus": sum("decubitus" in r.method for r in results)}


def test_block_projection_equals_the_per_event_projection_on_random_events():
    studies = _studies(20261202, [1, 1, 2, 3, 5, 8, 13, 21, 34, 55, 89, 144])
    results = []
    for events, height, weight in studies:
        new = compute_skin_dose(events, height_m=height, weight_kg=weight)
        _assert_same(new, reference_compute_skin_dose(events, height_m=height, weight_kg=weight))
        results.append(new)
    counts = _coverage(results)
    assert sum(len(e) for e, *_ in studies) == 376
    assert all(counts[k] >= 5 for k in ("no_geometry", "missed", "through_table", "hit")), counts
    assert all(counts[k] >= 2 for k in ("prone", "feet_first", "decubitus")), counts


def test_small_blocks_and_chunks_give_the_same_map(monkeypatch):
    # many events per study, cut into blocks of 7 events and chunks of 300 cells (one event
    # above that is a chunk of its own): the sums per cell still run in event order
    monkeypatch.setattr(skin_dose, "_BLOCK_EVENTS", 7)
    monkeypatch.setattr(skin_dose, "_BLOCK_CELLS", 300)
    for events, height, weight in _studies(7, [60, 130]):
        _assert_same(compute_skin_dose(events, height_m=height, weight_kg=weight),
                     reference_compute_skin_dose(events, height_m=height, weight_kg=weight))


@pytest.mark.parametrize("settings", [
    SkinDoseSettings(cell_mm=5.0, table_transmission=0.6, table_half_width_mm=150.0),
    SkinDoseSettings(cell_mm=25.0, table_height_offset_mm=-40.0, lateral_to_ap_ratio=1.2),
    SkinDoseSettings(cell_mm=10.0, rp_from_isocentre_mm=100.0)])
def test_the_settings_reach_both_projections_alike(settings):
    for events, height, weight in _studies(11, [40, 3]):
        _assert_same(compute_skin_dose(events, height_m=height, weight_kg=weight,
                                       settings=settings),
                     reference_compute_skin_dose(events, height_m=height, weight_kg=weight,
                                                 settings=settings))


def test_a_field_of_one_cell_and_the_demo_geometry_agree():
    # a 1 cm2 field lights a single cell (a product of one row, which BLAS rounds on its own
    # path); round demo-like geometry (PA at 0/0, whole-mm table, 10 mm cells) puts field
    # edges near cell centres
    base = dict(dose_rp_mgy=50.0, kvp=80.0, added_cu_mm=0.2, primary_angle_deg=0.0,
                secondary_angle_deg=0.0, source_to_isocenter_mm=600.0, source_to_detector_mm=1000.0,
                table_height_mm=-120.0, table_longitudinal_mm=0.0, table_lateral_mm=0.0,
                reference_point_definition="1cm above Tabletop")
    events = [SkinDoseEvent(**{**base, "field_area_cm2": area, "table_longitudinal_mm": y})
              for area in (1.0, 4.0, 400.0, 625.0) for y in (0.0, 5.0, 50.0, -130.0)]
    new = compute_skin_dose(events, height_m=1.7, weight_kg=70.0)
    _assert_same(new, reference_compute_skin_dose(events, height_m=1.7, weight_kg=70.0))
    # 1 cm2 at the detector is 4.8 mm wide at the back (480 of 1000 mm from the source): with
    # the table at 0 it covers the one cell under the central ray, 5 mm off it none
    assert [f["hit"] for f in new.event_factors[:2]] == [True, False]
    single = compute_skin_dose(events[:1], height_m=1.7, weight_kg=70.0)
    assert (single.dose_map_mgy > 0).sum() == 1


def test_an_empty_study_and_one_without_any_geometry():
    for events in ([], [SkinDoseEvent(dose_rp_mgy=10.0), SkinDoseEvent(dose_rp_mgy=5.0, kvp=70.0,
                                                                         field_area_cm2=200.0)]):
        new = compute_skin_dose(events)
        _assert_same(new, reference_compute_skin_dose(events))
        assert not new.dose_map_mgy.any()
