"""Each module's public surface is declared and importable (STYLE A.13)."""

import importlib

import pytest

MODULES = ["pipeline", "pipeline.concepts", "pipeline.errors", "pipeline.models", "pipeline.ingest",
           "pipeline.pseudonym", "pipeline.config", "pipeline.exams", "pipeline.audit",
           "pipeline.reference_store", "pipeline.jurisdiction", "pipeline.strata", "pipeline.parsing", "pipeline.units",
           "pipeline.parsing.content_tree", "pipeline.parsing.common", "pipeline.parsing.ct",
           "pipeline.parsing.projection", "pipeline.parsing.headers", "pipeline.sources.files",
           "pipeline.warehouse.connection", "pipeline.warehouse.tables", "pipeline.warehouse.load",
           "pipeline.metrics", "queries", "synthetic_studies", "synthetic_studies.scenario",
           "synthetic_studies.sampling", "synthetic_studies.generator", "synthetic_studies.write",
           "pipeline.warehouse.records", "pipeline.warehouse.key_epoch", "pipeline.net", "pipeline.net.inbox", "pipeline.net.scp",
           "pipeline.net.tls", "pipeline.net.dimse", "pipeline.net.dicomweb", "pipeline.net.drain",
           "pipeline.flows", "pipeline.flows.ingest", "pipeline.flows.audit",
           "pipeline.flows.publish", "pipeline.flows.monthly", "pipeline.flows.record",
           "pipeline.flows.retry", "pipeline.cli", "pipeline.cli.app", "pipeline.cli.corpus",
           "pipeline.cli.ingest", "pipeline.cli.query", "pipeline.cli.exams",
           "pipeline.cli.reference", "pipeline.cli.audit", "pipeline.cli.listen",
           "pipeline.cli.pull", "pipeline.cli.run", "pipeline.cli.completeness",
           "pipeline.net.completeness", "pipeline.skin_dose", "pipeline.notes", "pipeline.cli.note",
           "pipeline.cli.report", "pipeline.report", "pipeline.report.content",
           "pipeline.report.words", "pipeline.report.render", "pipeline.report.read",
           "pipeline.report.figures",
           "pipeline.vault", "pipeline.cli.keys", "pipeline.survey", "pipeline.cli.survey",
           "pipeline.adhoc", "pipeline.dictionary", "pipeline.cli.schema",
           "pipeline.network", "pipeline.network_store", "pipeline.cli.network"]


@pytest.mark.parametrize("name", MODULES)
def test_module_declares_and_exports_all(name):
    module = importlib.import_module(name)
    assert hasattr(module, "__all__"), name
    for symbol in module.__all__:
        assert hasattr(module, symbol), f"{name}.__all__ names missing {symbol!r}"


def test_patient_age_from_birth_date_or_age_string():
    import datetime as dt

    from pipeline.parsing.common import patient_age_years
    on = dt.date(2026, 10, 1)
    assert patient_age_years(None, dt.date(1976, 10, 1), on) == pytest.approx(50.0, abs=0.01)
    assert patient_age_years("045Y", None, on) == 45.0
    assert patient_age_years("006M", None, on) == 0.5
    assert patient_age_years("010D", None, on) == pytest.approx(10 / 365.25, abs=1e-3)
    assert patient_age_years("000Y", None, on) is None  # unknown or under one year: ambiguous
    assert patient_age_years("45Y", None, on) is None   # not a valid AS value (PS3.5)


def test_issue_16_exports():
    from pipeline import errors, pseudonym
    from pipeline.cli import audit
    from pipeline.warehouse import connection, key_epoch

    assert {"check_key_epoch", "current_key_epoch"} == set(key_epoch.__all__)
    assert {"connection", "evict_cached_blocks", "missing_warehouse_message",
            "scan_bounded"} == set(connection.__all__)
    assert "key_fingerprint" in pseudonym.__all__ and "KeyMismatchError" in errors.__all__
    assert issubclass(errors.KeyMismatchError, errors.ConfigError)   # stops with exit 2
    assert {"NO_DATA", "print_data_checks"} <= set(audit.__all__)


def test_issue_13_researcher_exports():
    from pipeline import adhoc, dictionary, errors

    assert {"read_only", "run_query", "check_query", "parse_params"} <= set(adhoc.__all__)
    assert {"PUBLIC_RELATIONS", "build_dictionary", "check_dictionary", "render_markdown",
            "fresh_public_columns"} <= set(dictionary.__all__)
    assert "QueryError" in errors.__all__ and issubclass(errors.QueryError, errors.DoseAuditError)


def test_issue_14_exports():
    from pipeline import audit
    from pipeline.metrics import drift
    assert {"audit_is_current", "AUDIT_MEMORY_LIMIT"} <= set(audit.__all__)
    assert {"best_change_points", "drift_flags", "SERIES_KEYS"} <= set(drift.__all__)
