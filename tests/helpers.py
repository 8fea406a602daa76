"""Small helpers shared by tests."""

import shutil

import pytest


def require_tool(name: str) -> str:
    """Path of an external reference tool; a missing tool fails the test (never skips)."""
    path = shutil.which(name)
    if path is None:
        pytest.fail(f"external tool {name!r} not found: install Debian packages dcmtk and "
                    f"dicom3tools (.ci/run does)", pytrace=False)
    return path
