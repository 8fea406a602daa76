"""Peak skin dose model (pipeline/skin_dose.py): worked single-event cases and geometry.

Check values are computed by hand from the stated factors: Ka,r x (d_RP / d_skin)^2 x BSF x
f x T (Jones & Pasciak, JACMP 2011;12(4):3670, Part I, the method). The factor values are the
module's tables, whose numbers are from memory (said beside each check below).
"""

import math

import numpy as np
import pytest

from pipeline.skin_dose import (BSF_FIELD_SIDES_CM, BSF_KVP, BSF_TABLE, F_TISSUE_AIR,
                                SkinDoseEvent, SkinDoseSettings, backscatter_factor,
                                beam_direction, compute_skin_dose, phantom_for)

# PA beam: detector above the supine patient (primary 0, secondary 0; PS3.3 C.8.7.5), source
# 750 mm below the isocentre, reference point 600 mm from the source (IEC 60601-2-43: 15 cm from
# the isocentre towards the source). Table top at -150 mm: the back is 600 mm from the source.
PA = dict(dose_rp_mgy=1000.0, kvp=80.0, primary_angle_deg=0.0, secondary_angle_deg=0.0,
          source_to_isocenter_mm=750.0, source_to_detector_mm=1000.0, field_area_cm2=400.0,
          table_height_mm=-150.0, table_longitudinal_mm=0.0, table_lateral_mm=0.0,
          reference_point_definition="15cm from Isocenter toward Source")


def _bsf_80kv(side_cm: float) -> float:
    # BSF_TABLE row 80 kV: 1.34 at 10 cm, 1.41 at 20 cm (values from memory, see the module)
    return 1.34 + (side_cm - 10.0) * (1.41 - 1.34) / 10.0


def test_pa_beam_equals_ka_r_times_the_stated_factors():
    result = compute_skin_dose([SkinDoseEvent(**PA)])
    # field 20 cm at the detector (1000 mm) -> 12 cm at the back (600 mm); inverse square 1;
    # BSF(80 kV, 12 cm) = 1.354; f = 1.06 (from memory); table + pad 0.75 (default, from memory)
    expected = 1000.0 * 1.0 * _bsf_80kv(12.0) * 1.06 * 0.75
    assert result.psd_mgy == pytest.approx(expected, rel=0.01)
    assert result.psd_mgy == pytest.approx(1076.43, rel=1e-4)   # 1000 x 1.354 x 1.06 x 0.75
    (factors,) = result.event_factors
    assert factors["inverse_square"] == pytest.approx(1.0)
    assert factors["table_transmission"] == 0.75
    assert result.psd_to_ka_r == pytest.approx(expected / 1000.0, rel=0.01)
    assert (result.n_events, result.n_events_with_geometry) == (1, 1)
    assert not result.is_upper_bound
    assert "Jones & Pasciak 2011" in result.method


def test_moving_the_table_towards_the_source_raises_psd_by_inverse_square():
    near = compute_skin_dose([SkinDoseEvent(**{**PA, "table_height_mm": -200.0})])
    far = compute_skin_dose([SkinDoseEvent(**PA)])
    # back at 550 mm instead of 600 mm: (600/550)^2 = 1.1901; the field at the skin shrinks
    # from 12.0 to 11.0 cm, which changes BSF by the stated table slope (1.347 / 1.354)
    isl = (600.0 / 550.0) ** 2
    assert near.psd_mgy / far.psd_mgy == pytest.approx(isl * _bsf_80kv(11.0) / _bsf_80kv(12.0),
                                                       rel=1e-3)
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
    bare = SkinDoseEvent(dose_rp_mgy=2000.0, kvp=80.0, field_area_cm2=100.0)
    result = compute_skin_dose([bare])
    # Ka,r x BSF(80 kV, 10 cm) x f = 2000 x 1.34 x 1.06 (values from memory): no ISL, no table
    assert result.psd_mgy == pytest.approx(2000.0 * 1.34 * 1.06, rel=1e-9)
    assert result.is_upper_bound and (result.n_events, result.n_events_with_geometry) == (1, 0)
    assert "upper bound" in result.method


def test_the_factors_used_are_the_tables_values_at_their_tabulated_points():
    # BSF_TABLE and F_TISSUE_AIR: values from memory of Petoussi-Henss et al. 1998 (ICRU
    # tissue) as used by Jones & Pasciak 2011 Part I, and of Hubbell & Seltzer NISTIR 5632;
    # ICRP Publication 117 gives BSF 1.2-1.6 for diagnostic and interventional beams
    for i, kvp in enumerate(BSF_KVP):
        for j, side in enumerate(BSF_FIELD_SIDES_CM):
            assert backscatter_factor(kvp, side) == pytest.approx(BSF_TABLE[i][j], abs=1e-12)
            assert 1.2 <= BSF_TABLE[i][j] <= 1.6                  # ICRP 117 range
    assert F_TISSUE_AIR == 1.06
    assert backscatter_factor(200.0, 100.0) == BSF_TABLE[-1][-1]   # clamped, not extrapolated


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
    i, j = np.unravel_index(np.argmax(result.dose_map_mgy), result.dose_map_mgy.shape)
    perimeter = result.around_mm.max() + (result.around_mm.max() - np.sort(result.around_mm)[-2])
    assert result.around_mm[i] == pytest.approx(perimeter / 2, rel=0.02)   # back midline
    assert result.along_mm[j] == 0.0                                       # isocentre level
    # a 12 cm field at the back covers about 12 cells of 10 mm along the body
    assert 10 <= (result.dose_map_mgy[i] > 0).sum() <= 14
