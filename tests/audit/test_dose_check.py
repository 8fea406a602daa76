"""CT dose check: accumulated CTDIvol by table position (NEMA XR 25; AAPM 2011 recommendations).

NEMA XR 25 and the AAPM's "Recommendations regarding notification and alert values for CT
scanners" (2011, v1.0) define the alert on the CTDIvol accumulated at a z-location; the AAPM
alert value is CTDIvol 1000 mGy (from memory; corroborated by a manufacturer's dose-check
slides, see queries/seeds/alert_thresholds.csv). Scans over the same range add up; scans of
different ranges do not.
"""

import pytest

from pipeline.metrics import accumulated_ctdivol_by_position
from pipeline.metrics.dose_check import METHOD_BY_POSITION, METHOD_UPPER_BOUND

AAPM_ALERT_CTDIVOL_MGY = 1000.0   # AAPM 2011 alert value (from memory, corroborated)


def test_three_overlapping_400_mgy_acquisitions_alert():
    value, method = accumulated_ctdivol_by_position(
        [(400.0, 0.0, 100.0), (400.0, 20.0, 120.0), (400.0, -10.0, 90.0)])
    assert value == 1200.0 and method == METHOD_BY_POSITION
    assert value > AAPM_ALERT_CTDIVOL_MGY


def test_three_non_overlapping_400_mgy_acquisitions_do_not_alert():
    value, method = accumulated_ctdivol_by_position(
        [(400.0, 0.0, 100.0), (400.0, 100.0, 200.0), (400.0, 300.0, 250.0)])  # any order of ends
    assert value == 400.0 and method == METHOD_BY_POSITION
    assert value < AAPM_ALERT_CTDIVOL_MGY


def test_partial_overlap_takes_the_maximum_over_z():
    # 0-100 and 50-150 overlap on 50-100 (sum 300); 150-250 touches the second only at its end
    value, _ = accumulated_ctdivol_by_position(
        [(100.0, 0.0, 100.0), (200.0, 50.0, 150.0), (500.0, 150.0, 250.0)])
    assert value == 500.0


def test_a_stationary_acquisition_at_one_position_counts_there():
    value, _ = accumulated_ctdivol_by_position([(300.0, 40.0, 40.0), (300.0, 0.0, 80.0)])
    assert value == 600.0


def test_missing_positions_give_the_sum_labelled_an_upper_bound():
    value, method = accumulated_ctdivol_by_position(
        [(400.0, 0.0, 100.0), (400.0, None, None), (400.0, 300.0, 400.0)])
    assert value == 1200.0 and method == METHOD_UPPER_BOUND
    assert "UPPER BOUND" in method and "not reported" in method


def test_no_acquisition_is_zero():
    assert accumulated_ctdivol_by_position([])[0] == 0.0
