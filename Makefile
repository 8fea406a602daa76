# The two commands a new user needs: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test install tools clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

install: $(STAMP)

# Debian packages the tests and the demo call (dcmtk, dicom3tools, chromium, orthanc,
# orthanc-dicomweb, poppler-utils, openssl): installed when missing (apt-get as root, else sudo).
tools:
	@scripts/system-tools

demo: $(STAMP) tools
	$(BIN)/kerma demo

# Two pytest-xdist workers (CI is a 2-core machine); a test file stays on one worker, so its
# module fixtures (Orthanc, Chromium, the Prefect server) start once. TEST_WORKERS=0: one process.
TEST_WORKERS ?= 2
test: $(STAMP) tools
	$(BIN)/python -m pytest -n $(TEST_WORKERS) --dist loadfile

clean:
	rm -rf kerma-demo .pytest_cache
