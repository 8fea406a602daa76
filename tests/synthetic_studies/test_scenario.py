"""The invented network has the units, identities and stories the issue asks for."""

from collections import Counter
from importlib import resources

import pytest

from synthetic_studies.sampling import device_observer_uid, make_study
from synthetic_studies.scenario import load_scenario


def test_network_has_the_required_units():
    scenario = load_scenario()
    by_modality = Counter(d.modality for d in scenario.devices)
    assert by_modality == {"CT": 4, "DX": 3, "CR": 1, "RF": 1, "XA": 1, "MG": 2}
    assert [d.id for d in scenario.devices if d.biplane] == ["tgh-xa1"]
    assert [d.id for d in scenario.devices if d.reports == "image_header"] == ["mph-cr1"]
    assert [d.id for d in scenario.devices if d.reports == "dose_screen"] == ["cic-ct1"]
    assert [d.id for d in scenario.devices if d.cumulative_reports > 0] == ["mph-ct1"]
    assert [d.id for d in scenario.devices if d.header_images] == ["ovh-ct1", "ovh-mg1"]
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


def _bundled_toml() -> str:
    return resources.files("synthetic_studies").joinpath("scenario.toml").read_text("utf-8")


@pytest.mark.parametrize("device_id, message", [
    ("mph-cr1", "needs reports = 'rdsr'"),     # a header-only unit writes images anyway
    ("ovh-dx1", "no header-image writer"),     # only CT and MG units have image writers
])
def test_loader_rejects_header_images_it_cannot_write(tmp_path, device_id, message):
    text = _bundled_toml().replace(f'id = "{device_id}"\n',
                                   f'id = "{device_id}"\nheader_images = true\n', 1)
    assert f'id = "{device_id}"\nheader_images = true' in text
    path = tmp_path / "scenario.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ValueError, match=message):
        load_scenario(path)


def test_header_images_follow_the_rdsr_and_skip_localizers():
    """make_study lists RDSRs first, then one image per non-localizer CT acquisition or per
    mammography view, each keyed to its event; the study keeps no cumulative-report story."""
    scenario = load_scenario()
    seen = set()
    for index in range(400):
        spec = make_study(scenario, 7, index, 400, 3)
        if spec.device not in ("ovh-ct1", "ovh-mg1"):
            assert all(r.kind == "rdsr" for r in spec.reports) or spec.device in ("mph-cr1", "cic-ct1")
            continue
        seen.add(spec.device)
        kinds = [r.kind for r in spec.reports]
        assert kinds[0] == "rdsr" and kinds.count("rdsr") == 1
        images = [r for r in spec.reports if r.kind == "image_header"]
        shown = [spec.events[r.event_number - 1] for r in images]
        if spec.device == "ovh-ct1":
            assert [e.kind for e in spec.events].count("localizer") == 1
            assert [e.event_uid for e in shown] == \
                [e.event_uid for e in spec.events if e.kind != "localizer"]
            assert len({r.series_instance_uid for r in images}) == len(images)
            assert len({r.frame_of_reference_uid for r in images}) == 1
            assert images[0].frame_of_reference_uid is not None
        else:
            assert shown == list(spec.events)
            assert len({r.series_instance_uid for r in images}) == 1
            assert all(e.compression_force_n and 50 <= e.compression_force_n <= 200
                       for e in shown)
        assert len({r.sop_instance_uid for r in spec.reports}) == len(spec.reports)
        assert spec.story != "cumulative_reports"
    assert seen == {"ovh-ct1", "ovh-mg1"}
