"""The invented network has the units, identities and stories the issue asks for."""

from collections import Counter

from synthetic_studies.sampling import device_observer_uid, make_study
from synthetic_studies.scenario import load_scenario


def test_network_has_the_required_units():
    scenario = load_scenario()
    by_modality = Counter(d.modality for d in scenario.devices)
    assert by_modality == {"CT": 3, "DX": 3, "CR": 1, "RF": 1, "XA": 1, "MG": 2}
    assert [d.id for d in scenario.devices if d.biplane] == ["tgh-xa1"]
    assert [d.id for d in scenario.devices if d.reports == "image_header"] == ["mph-cr1"]
    assert [d.id for d in scenario.devices if d.cumulative_reports > 0] == ["mph-ct1"]
    assert len(scenario.sites) == 4


def test_device_identity_is_unique_and_independent_of_seed():
    scenario = load_scenario()
    uids = [device_observer_uid(scenario, d.id) for d in scenario.devices]
    assert len(set(uids)) == len(uids)
    serials = [d.serial for d in scenario.devices]
    assert len(set(serials)) == len(serials)
    # the same unit in corpora drawn with different seeds keeps its observer UID
    study_a = make_study(scenario, 1, 0, 10, 1)
    study_b = make_study(scenario, 2, 0, 10, 1)
    assert device_observer_uid(scenario, study_a.device) == device_observer_uid(scenario, study_a.device)
    assert study_a.study_uid != study_b.study_uid


def test_make_study_is_pure():
    scenario = load_scenario()
    assert make_study(scenario, 7, 42, 500, 3) == make_study(scenario, 7, 42, 500, 3)
    assert make_study(scenario, 7, 42, 500, 3) != make_study(scenario, 8, 42, 500, 3)
