"""Fixtures of the network tests: real processes on loopback (kerma listen, Orthanc, dcmtk)."""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pandas as pd
import pydicom
import pytest

from synthetic_studies.write import write_corpus
from tests.helpers import KEY

ROOT = Path(__file__).resolve().parents[2]
KERMA = str(Path(sys.executable).parent / "kerma")
ENV = {**os.environ, "KERMA_PSEUDONYM_KEY": KEY.decode(), "PYTHONPATH": str(ROOT), "COLUMNS": "200"}
DOSE_SR = {"1.2.840.10008.5.1.4.1.1.88.67", "1.2.840.10008.5.1.4.1.1.88.76"}


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def kerma(*args: str, timeout: float = 120) -> subprocess.CompletedProcess:
    return subprocess.run([KERMA, *args], capture_output=True, text=True, env=ENV, cwd=ROOT,
                          timeout=timeout)


@pytest.fixture(scope="session")
def net_corpus(tmp_path_factory) -> tuple[Path, pd.DataFrame]:
    """30 demo studies of September 2026 (seed 5): dose SRs, images, and deliberate defects."""
    out = tmp_path_factory.mktemp("net_corpus")
    write_corpus(out, seed=5, months=1, n_studies=30, workers=1)
    return out, pd.read_parquet(out / "files.parquet")


@pytest.fixture(scope="session")
def sendable(net_corpus) -> list[Path]:
    """Complete DICOM files of the corpus with distinct SOP Instance UIDs (dose SRs and images)."""
    root, files = net_corpus
    keep = files[files.kind.isin(["rdsr", "image_header"]) & files.defect.isna()]
    paths = [root / p for p in sorted(keep.path)]
    assert len(paths) >= 10
    return paths


def sop_uid(path: Path) -> str:
    return str(pydicom.dcmread(path, stop_before_pixels=True).SOPInstanceUID)


class Listener:
    """`kerma listen` in a child process; its log (stderr) goes to a file the test reads."""

    def __init__(self, tmp: Path, *args: str, ae_title: str = "KERMA") -> None:
        self.port = free_port()
        self.ae_title = ae_title
        self.inbox = tmp / "inbox"
        self.log_path = tmp / f"listen-{self.port}.log"
        self._log = open(self.log_path, "w")
        self.proc = subprocess.Popen(
            [KERMA, "listen", "--ae-title", ae_title, "--port", str(self.port), "--host",
             "127.0.0.1", "--inbox", str(self.inbox), *args],
            stdout=subprocess.DEVNULL, stderr=self._log, env=ENV, cwd=ROOT)
        self.wait_for("listening as")

    def log(self) -> str:
        return self.log_path.read_text()

    def wait_for(self, text: str, count: int = 1, timeout: float = 60) -> str:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            log = self.log()
            if log.count(text) >= count:
                return log
            if self.proc.poll() is not None:
                raise AssertionError(f"kerma listen exited {self.proc.returncode}:\n{log}")
            time.sleep(0.1)
        raise AssertionError(f"{text!r} x{count} not logged within {timeout} s:\n{self.log()}")

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        self._log.close()


@pytest.fixture
def listener(tmp_path):
    started: list[Listener] = []

    def start(*args: str, **kwargs) -> Listener:
        item = Listener(tmp_path, *args, **kwargs)
        started.append(item)
        return item

    yield start
    for item in started:
        item.stop()


# --- Orthanc: the archive the pull tests fetch from ---------------------------------------------

ORTHANC = "/usr/sbin/Orthanc"
DICOMWEB_PLUGIN = next((p for p in ("/usr/share/orthanc/plugins/libOrthancDicomWeb.so",
                                    *sorted(Path("/usr/lib/orthanc").glob("libOrthancDicomWeb.so*")))
                        if Path(p).exists()), None)


class Orthanc:
    """A throw-away Orthanc (Debian package) on free loopback ports, with the DICOMweb plugin."""

    aet = "ARCHIVE"

    def __init__(self, tmp: Path, modalities: dict[str, tuple[str, int]]) -> None:
        if not Path(ORTHANC).exists() or DICOMWEB_PLUGIN is None:
            pytest.fail("Orthanc not found: install Debian packages orthanc and orthanc-dicomweb "
                        "(make test does)", pytrace=False)
        self.http_port, self.dicom_port = free_port(), free_port()
        config = {
            "Name": "kerma-test-archive", "StorageDirectory": str(tmp / "storage"),
            "IndexDirectory": str(tmp / "index"), "HttpPort": self.http_port,
            "DicomPort": self.dicom_port, "DicomAet": self.aet, "RemoteAccessAllowed": False,
            "AuthenticationEnabled": False, "HttpServerEnabled": True,
            "DicomModalities": {name: [aet, "127.0.0.1", port]
                                for name, (aet, port) in modalities.items()},
            "DicomAlwaysAllowGet": True, "DicomAlwaysAllowMove": True,
            "DicomAlwaysAllowFind": True, "DicomAlwaysAllowEcho": True,
            "Plugins": [DICOMWEB_PLUGIN], "DicomWeb": {"Enable": True, "Root": "/dicom-web/"},
            "StorageAccessOnFind": "Always", "HttpTimeout": 30,
        }
        (tmp / "orthanc.json").write_text(json.dumps(config))
        self._log = open(tmp / "orthanc.log", "w")
        self.proc = subprocess.Popen([ORTHANC, str(tmp / "orthanc.json")], stdout=self._log,
                                     stderr=subprocess.STDOUT)
        self.url = f"http://127.0.0.1:{self.http_port}"
        self.http = httpx.Client(base_url=self.url, timeout=30)
        deadline = time.monotonic() + 60
        while True:
            try:
                if self.http.get("/system").status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if self.proc.poll() is not None or time.monotonic() > deadline:
                raise AssertionError(f"Orthanc did not start:\n{(tmp / 'orthanc.log').read_text()}")
            time.sleep(0.2)

    def upload(self, paths: list[Path]) -> None:
        for path in paths:
            response = self.http.post("/instances", content=path.read_bytes())
            assert response.status_code == 200, response.text

    def stop(self) -> None:
        self.http.close()
        self.proc.terminate()
        try:
            self.proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        self._log.close()


@pytest.fixture(scope="module")
def archive(tmp_path_factory, net_corpus):
    """Orthanc holding every complete file of the corpus; knows our AE KERMAPULL on a free port."""
    root, files = net_corpus
    tmp = tmp_path_factory.mktemp("orthanc")
    our_port = free_port()
    server = Orthanc(tmp, {"kerma": ("KERMAPULL", our_port)})
    complete = files[files.kind.isin(["rdsr", "image_header", "other"]) & files.defect.isna()]
    server.upload([root / p for p in sorted(complete.path)])
    server.our_port = our_port
    server.stored_paths = [root / p for p in sorted(complete.path)]
    server.dose_reports = {r.sop_instance_uid: root / r.path for r in complete.itertuples()
                           if r.sop_class_uid in DOSE_SR}
    headers = [pydicom.dcmread(root / p, stop_before_pixels=True) for p in complete.path]
    server.n_studies = len({str(h.StudyInstanceUID) for h in headers})
    server.study_date = {str(h.SOPInstanceUID): str(h.StudyDate) for h in headers}
    yield server
    server.stop()


def copy_tree(src: Path, dst: Path) -> None:
    shutil.copytree(src, dst, dirs_exist_ok=True)
