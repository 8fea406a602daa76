"""Peak skin dose model (pipeline/skin_dose.py): worked single-event cases, geometry, patient
position, and the factors against the publications they come from.

Check values are computed by hand from the stated factors: Ka,r x (d_RP / d_skin)^2 x B x f x T
(Jones & Pasciak, JACMP 2011;12(4):3670, Part I: the method, from memory). B is Benmakhlouf et
al. 2011 (Phys Med Biol 56:7179) as tabulated in the PySkinDose repository (not read in the
paper); f = 1.06 against NIST SRD 126 (Hubbell & Seltzer); T = 0.75 is from memory.
"""

import math

import numpy as np
import pytest

from pipeline.skin_dose import (BSF_SOURCE, F_TISSUE_AIR, SkinDoseEvent, SkinDoseSettings,
                                backscatter_factor, backscatter_table, beam_direction,
                                compute_skin_dose, patient_rotation, phantom_for)

# PA beam: detector above the supine patient (primary 0, secondary 0; PS3.3 C.8.7.5), source
# 750 mm below the isocentre, reference point 600 mm from the source (IEC 60601-2-43: 15 cm from
# the isocentre towards the source). Table top at -150 mm: the back is 600 mm from the source.
PA = dict(dose_rp_mgy=1000.0, kvp=80.0, added_cu_mm=0.1, primary_angle_deg=0.0,
          secondary_angle_deg=0.0, source_to_isocenter_mm=750.0, source_to_detector_mm=1000.0,
          field_area_cm2=400.0, table_height_mm=-150.0, table_longitudinal_mm=0.0,
          table_lateral_mm=0.0, reference_point_definition="15cm from Isocenter toward Source")

# Benmakhlouf et al. 2011, ICRU tissue, 3.1 mm Al + 0.1 mm Cu at 80 kV (HVL 4.66 mm Al):
# B = 1.392 for a 10 cm x 10 cm field and 1.476 for 20 cm x 20 cm (copy in the PySkinDose repository)
B_80KV_01CU_10CM, B_80KV_01CU_20CM = 1.392, 1.476


def _b_80kv(side_cm: float) -> float:
    return B_80KV_01CU_10CM + (side_cm - 10.0) * (B_80KV_01CU_20CM - B_80KV_01CU_10CM) / 10.0


def _peak(result):
    return np.unravel_index(np.argmax(result.dose_map_mgy), result.dose_map_mgy.shape)


def _perimeter(result) -> float:
    around = np.sort(result.around_mm)
    return around[-1] + (around[-1] - around[-2])


def test_pa_beam_equals_ka_r_times_the_stated_factors():
    result = compute_skin_dose([SkinDoseEvent(**PA)])
    # field 20 cm at the detector (1000 mm) -> 12 cm at the back (600 mm); inverse square 1;
    # B(80 kV, 0.1 mm Cu, 12 cm) = 1.392 + 0.2 x 0.084 = 1.4088 (Benmakhlouf 2011, linear);
    # f = 1.06 (NIST SRD 126, see below); table + pad 0.75 (default, from memory)
    expected = 1000.0 * 1.0 * _b_80kv(12.0) * 1.06 * 0.75
    assert result.psd_mgy == pytest.approx(expected, rel=0.01)
    assert result.psd_mgy == pytest.approx(1120.0, rel=1e-4)   # 1000 x 1.4088 x 1.06 x 0.75
    (factors,) = result.event_factors
    assert factors["inverse_square"] == pytest.approx(1.0)
    assert factors["bsf"] == pytest.approx(1.4088, rel=1e-9)
    assert factors["table_transmission"] == 0.75
    assert result.psd_to_ka_r == pytest.approx(expected / 1000.0, rel=0.01)
    assert (result.n_events, result.n_events_with_geometry) == (1, 1)
    assert not result.is_upper_bound
    assert "Jones & Pasciak 2011" in result.method
    assert "supine, head-first (orientation not reported: supine assumed" in result.method


def test_moving_the_table_towards_the_source_raises_psd_by_inverse_square():
    near = compute_skin_dose([SkinDoseEvent(**{**PA, "table_height_mm": -200.0})])
    far = compute_skin_dose([SkinDoseEvent(**PA)])
    # back at 550 mm instead of 600 mm: (600/550)^2 = 1.1901; the field at the skin shrinks
    # from 12.0 to 11.0 cm, which changes B by the tabulated slope (1.4004 / 1.4088)
    isl = (600.0 / 550.0) ** 2
    assert near.psd_mgy / far.psd_mgy == pytest.approx(isl * _b_80kv(11.0) / _b_80kv(12.0), rel=1e-3)
    assert near.psd_mgy / far.psd_mgy == pytest.approx(isl, rel=0.01)


def test_a_beam_through_the_table_is_reduced_by_the_stated_transmission():
    open_table = compute_skin_dose([SkinDoseEvent(**PA)], settings=SkinDoseSettings(table_transmission=1.0))
    with_table = compute_skin_dose([SkinDoseEvent(**PA)], settings=SkinDoseSettings(table_transmission=0.6))
    assert with_table.psd_mgy / open_table.psd_mgy == pytest.approx(0.6, rel=1e-9)
    # a lateral beam (source at the patient's right, above the table top) misses the table
    lateral = compute_skin_dose([SkinDoseEvent(**{**PA, "primary_angle_deg": 90.0})])
    assert lateral.event_factors[0]["table_transmission"] == 1.0


def test_two_beams_90_degrees_apart_give_the_maximum_not_the_sum():
    pa = SkinDoseEvent(**PA)
    lateral = SkinDoseEvent(**{**PA, "primary_angle_deg": 90.0, "dose_rp_mgy": 1500.0})
    both = compute_skin_dose([pa, lateral]).psd_mgy
    singles = [compute_skin_dose([e]).psd_mgy for e in (pa, lateral)]
    assert both == pytest.approx(max(singles), rel=1e-9)
    assert both < 0.8 * sum(singles)


def test_the_same_beams_through_one_entrance_field_add_up():
    pa = SkinDoseEvent(**PA)
    again = SkinDoseEvent(**{**PA, "dose_rp_mgy": 500.0})
    single = compute_skin_dose([pa]).psd_mgy
    assert compute_skin_dose([pa, again]).psd_mgy == pytest.approx(1.5 * single, rel=1e-9)


def test_an_event_without_geometry_is_an_upper_bound_at_the_reference_point():
    bare = SkinDoseEvent(dose_rp_mgy=2000.0, kvp=80.0, added_cu_mm=0.1, field_area_cm2=100.0)
    result = compute_skin_dose([bare])
    # Ka,r x B(80 kV, 0.1 mm Cu, 10 cm) x f = 2000 x 1.392 x 1.06: no ISL, no table
    assert result.psd_mgy == pytest.approx(2000.0 * 1.392 * 1.06, rel=1e-9)
    assert result.is_upper_bound and (result.n_events, result.n_events_with_geometry) == (1, 0)
    assert "upper bound" in result.method


# Benmakhlouf H, Bouchard H, Fransson A, Andreo P. Phys Med Biol 2011;56:7179, ICRU tissue,
# 3.1 mm Al inherent: (kVp, added Cu mm, field side cm) -> B, as tabulated in
# rvbCMTS/PySkinDose src/pyskindose/table_data/correction_medium_and_backscatter.csv (3cb23ea)
@pytest.mark.parametrize("kvp, cu, side, published", [
    (60, 0.0, 5, 1.222), (70, 0.6, 20, 1.576), (80, 0.1, 10, 1.392), (80, 0.1, 20, 1.476),
    (90, 0.2, 35, 1.577), (100, 0.3, 25, 1.591), (110, 0.9, 10, 1.429), (120, 0.9, 35, 1.633)])
def test_backscatter_equals_the_published_table_at_its_points(kvp, cu, side, published):
    assert backscatter_factor(kvp, side, cu) == pytest.approx(published, abs=1e-12)


def test_backscatter_is_clamped_and_unknown_copper_takes_the_largest():
    kvp, cu, side, values = backscatter_table()
    assert values.shape == (len(kvp), len(cu), len(side)) == (7, 6, 5)
    assert backscatter_factor(200.0, 100.0, 5.0) == pytest.approx(1.633)   # 120 kV, 0.9 Cu, 35 cm
    # unknown Cu at 80 kV, 20 cm: the largest of the row, 1.605 at 0.9 mm Cu (Benmakhlouf 2011)
    assert backscatter_factor(80.0, 20.0, None) == pytest.approx(1.605)
    # ICRP Publication 117 (from memory) gives B of about 1.2-1.6 for these beams
    assert 1.2 <= values.min() and values.max() <= 1.7
    assert "Benmakhlouf et al. 2011" in BSF_SOURCE and "not read in the original article" in BSF_SOURCE


def test_tissue_to_air_ratio_against_the_nist_tables():
    # NIST SRD 126 (Hubbell & Seltzer), mu_en/rho in cm2/g: ICRU-44 soft tissue / dry air
    # (read through the search tool from the copy in kingtaurus/CTSim physicsdata/materials)
    tissue = {40: 7.216e-2, 50: 4.360e-2, 60: 3.264e-2}
    air = {40: 6.833e-2, 50: 4.098e-2, 60: 3.041e-2}
    ratio = {kev: tissue[kev] / air[kev] for kev in tissue}
    assert ratio[40] == pytest.approx(1.0561, abs=1e-4)
    assert ratio[60] == pytest.approx(1.0733, abs=1e-4)
    assert ratio[40] <= F_TISSUE_AIR <= ratio[60]
    assert F_TISSUE_AIR == pytest.approx(ratio[50], rel=0.005)


def test_beam_direction_follows_the_dicom_angle_signs():
    # PS3.3 C.8.7.5: LAO +90 puts the detector at the patient's left; cranial +90 at the head
    assert np.allclose(beam_direction(0, 0), [0, 0, 1])
    assert np.allclose(beam_direction(90, 0), [1, 0, 0])
    assert np.allclose(beam_direction(0, 90), [0, 1, 0])


def test_phantom_from_height_and_weight_else_the_reference_adult():
    ref = phantom_for(None, 80.0)
    assert "reference adult" in ref.basis
    # 0.45 x 73 kg / (0.30 x 1.76 m) at 1 g/cm3 = 622 cm2 = pi a b with a = 1.5 b
    assert math.pi * ref.semi_lateral_mm * ref.semi_ap_mm == pytest.approx(0.45 * 73e6 / (0.3 * 1760))
    assert phantom_for(1.6, 100.0).semi_ap_mm > phantom_for(1.6, 60.0).semi_ap_mm


def test_the_unrolled_map_puts_a_pa_field_on_the_back_at_its_centre():
    result = compute_skin_dose([SkinDoseEvent(**PA)])
    i, j = _peak(result)
    assert result.around_mm[i] == pytest.approx(_perimeter(result) / 2, rel=0.02)   # back midline
    assert result.along_mm[j] == 0.0                                                # isocentre level
    # a 12 cm field at the back covers about 12 cells of 10 mm along the body
    assert 10 <= (result.dose_map_mgy[i] > 0).sum() <= 14


def test_prone_puts_the_under_table_beam_on_the_front():
    supine = compute_skin_dose([SkinDoseEvent(**PA, patient_orientation_modifier="supine",
                                              patient_table_relationship="headfirst")])
    prone = compute_skin_dose([SkinDoseEvent(**PA, patient_orientation_modifier="prone",
                                             patient_table_relationship="headfirst")])
    i, _ = _peak(prone)
    around = prone.around_mm[i]
    assert min(around, _perimeter(prone) - around) < 0.02 * _perimeter(prone)    # front midline
    # the same distances: the anterior skin lies on the table as the back did (to the cell
    # grid: a cell centre sits on the posterior midline, the anterior one may be half a cell off)
    assert prone.psd_mgy == pytest.approx(supine.psd_mgy, rel=2e-3)
    assert "prone, head-first" in prone.method and "assumed" not in prone.method


def test_feet_first_flips_the_longitudinal_direction_and_the_sides():
    shifted = {**PA, "table_longitudinal_mm": 100.0}
    head = compute_skin_dose([SkinDoseEvent(**shifted, patient_table_relationship="headfirst")])
    feet = compute_skin_dose([SkinDoseEvent(**shifted, patient_table_relationship="feet-first")])
    assert head.along_mm[_peak(head)[1]] == -100.0     # the beam falls 100 mm towards the feet
    assert feet.along_mm[_peak(feet)[1]] == 100.0      # ... towards the head when feet-first
    # a beam from the room's -x side enters the patient's right (head-first supine) or left
    lateral = {**PA, "primary_angle_deg": 90.0}
    right = compute_skin_dose([SkinDoseEvent(**lateral, patient_table_relationship="headfirst")])
    left = compute_skin_dose([SkinDoseEvent(**lateral, patient_table_relationship="feet-first")])
    quarter = _perimeter(right) / 4
    assert right.around_mm[_peak(right)[0]] == pytest.approx(quarter, rel=0.05)
    assert left.around_mm[_peak(left)[0]] == pytest.approx(3 * quarter, rel=0.05)


def test_unsupported_positions_fall_back_to_supine_head_first_and_say_so():
    rotation, label = patient_rotation("sitting", "left first")
    assert np.allclose(rotation, np.eye(3))
    assert label == ("supine, head-first (orientation 'sitting' not modelled: supine assumed; "
                     "table relationship 'left first' not modelled: head-first assumed)")


def test_factor_rows_name_every_factor_and_its_source():
    rows = {r["factor"]: r for r in compute_skin_dose([SkinDoseEvent(**PA)]).factor_rows()}
    assert set(rows) == {"inverse_square", "backscatter", "f_tissue_air", "table_transmission"}
    assert rows["backscatter"]["value_min"] == pytest.approx(1.4088)
    assert rows["table_transmission"]["value_max"] == 0.75
    assert "from memory" in rows["table_transmission"]["source"]
    assert "NIST" in rows["f_tissue_air"]["source"]
