"""Shared fixtures: strict pydicom, a small synthetic corpus, external tool lookup."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

# Prefect runs in its own local mode (no server) with a throw-away home: set before anything
# imports prefect, and inherited by the `kerma` processes the tests start.
os.environ["PREFECT_HOME"] = tempfile.mkdtemp(prefix="kerma-test-prefect-")
os.environ.pop("PREFECT_API_URL", None)
os.environ["PREFECT_LOGGING_LEVEL"] = "WARNING"
os.environ["PREFECT_SERVER_ANALYTICS_ENABLED"] = "false"   # no telemetry calls from tests
# Prefect's local server gets 20 s to start by default: too little on a loaded 2-core machine.
os.environ.setdefault("PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS", "120")

import pandas as pd  # noqa: E402
import pydicom.config  # noqa: E402
import pytest  # noqa: E402

from synthetic_studies.write import write_corpus  # noqa: E402
from tests.helpers import built_once  # noqa: E402

# Tests run strict (STYLE A.8): invalid values raise instead of warning.
pydicom.config.settings.reading_validation_mode = pydicom.config.RAISE
pydicom.config.settings.writing_validation_mode = pydicom.config.RAISE

CORPUS_STUDIES = 320   # enough for every unit, story and defect to appear
CORPUS_SEED = 7


@pytest.fixture(scope="session")
def corpus(tmp_path_factory) -> Path:
    """The demo scenario at small size: seed 7, 3 months, 320 studies."""
    def build(out: Path) -> Path:
        write_corpus(out, seed=CORPUS_SEED, months=3, n_studies=CORPUS_STUDIES, workers=2)
        return out

    return built_once(tmp_path_factory, "corpus", build)


@pytest.fixture(scope="session")
def files_manifest(corpus) -> pd.DataFrame:
    return pd.read_parquet(corpus / "files.parquet")


@pytest.fixture(scope="session")
def studies_manifest(corpus) -> pd.DataFrame:
    return pd.read_parquet(corpus / "studies.parquet")


@pytest.fixture(scope="session")
def warehouse(corpus, tmp_path_factory):
    """The session corpus ingested (2 worker processes) into a fresh DuckDB file."""
    from pipeline.ingest import ingest
    from tests.helpers import KEY

    def build(root: Path):
        db = root / "kerma.duckdb"
        return db, ingest([corpus], db, KEY, workers=2)

    return built_once(tmp_path_factory, "warehouse", build)


@pytest.fixture(scope="session")
def audited(tmp_path_factory):
    """A demo-like network (seed 7, 3 months, 1200 studies) ingested and audited over all three
    months: large enough for the stories (step change, high protocol) to be found."""
    import datetime as dt

    from pipeline.audit import run_audit
    from pipeline.ingest import ingest
    from tests.helpers import KEY

    def build(root: Path):
        write_corpus(root / "corpus", seed=7, months=3, n_studies=1200, workers=2)
        db = root / "kerma.duckdb"
        ingest([root / "corpus"], db, KEY, workers=2)
        summary = run_audit(db, date_from=dt.date(2026, 9, 1), date_to=dt.date(2026, 11, 30))
        return db, summary, root / "corpus"

    return built_once(tmp_path_factory, "audited", build)
