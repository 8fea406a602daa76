"""`kerma listen` against real clients on loopback: dcmtk echoscu/storescu and pynetdicom."""

from __future__ import annotations

import os
import signal
import ssl
import subprocess
import threading
import time
from pathlib import Path

import pydicom
import pytest
from pydicom.uid import RLELossless, generate_uid
from pynetdicom import AE
from pynetdicom.sop_class import Verification

from pipeline.net.dimse import close_transport
from pipeline.net.inbox import partial_dir
from tests.helpers import require_tool

from .conftest import sop_uid

CALLING = "MODALITY1"


def _client(*sop_classes, ae_title: str = CALLING) -> AE:
    ae = AE(ae_title=ae_title)
    ae.add_requested_context(Verification)
    for sop_class in sop_classes:   # one context per transfer syntax: the SCP accepts each
        ae.add_requested_context(sop_class, pydicom.uid.ExplicitVRLittleEndian)
        ae.add_requested_context(sop_class, RLELossless)
    ae.acse_timeout = ae.dimse_timeout = ae.network_timeout = 30
    return ae


def _same_object(stored: Path, original: Path) -> None:
    a, b = pydicom.dcmread(stored), pydicom.dcmread(original)
    assert a == b   # every element of the data set as sent (the file meta is rebuilt)
    assert a.file_meta.TransferSyntaxUID == b.file_meta.TransferSyntaxUID


def test_echoscu_and_storescu_store_every_object(listener, sendable):
    echoscu, storescu = require_tool("echoscu"), require_tool("storescu")
    scp = listener("--allow", CALLING)
    echo = subprocess.run([echoscu, "-aet", CALLING, "-aec", scp.ae_title, "127.0.0.1",
                           str(scp.port)], capture_output=True, text=True, timeout=60)
    assert echo.returncode == 0, echo.stderr
    store = subprocess.run([storescu, "-aet", CALLING, "-aec", scp.ae_title, "127.0.0.1",
                            str(scp.port), *map(str, sendable)], capture_output=True, text=True,
                           timeout=120)
    assert store.returncode == 0, store.stderr
    log = scp.wait_for(f"objects={len(sendable)} failed=0 outcome=released")
    assert f"calling_ae={CALLING} peer=127.0.0.1:" in log
    assert log.count("calling_ae=MODALITY1") == 2      # one line per association (echo, store)
    stored = {p.name: p for p in scp.inbox.iterdir()}
    assert sorted(stored) == sorted(f"{sop_uid(p)}.dcm" for p in sendable)
    for original in sendable:
        _same_object(stored[f"{sop_uid(original)}.dcm"], original)


def test_refused_calling_ae_title(listener, sendable):
    scp = listener("--allow", CALLING)
    echoscu = require_tool("echoscu")
    refused = subprocess.run([echoscu, "-aet", "INTRUDER", "-aec", scp.ae_title, "127.0.0.1",
                              str(scp.port)], capture_output=True, text=True, timeout=60)
    assert refused.returncode != 0
    assert "Calling AE Title Not Recognized" in refused.stderr
    assert "calling_ae=INTRUDER" in scp.wait_for("outcome=rejected")
    assoc = _client(ae_title="INTRUDER").associate("127.0.0.1", scp.port, ae_title=scp.ae_title)
    assert assoc.is_rejected
    close_transport(assoc)
    assert list(scp.inbox.iterdir()) == []


def test_statuses_compressed_image_stored_as_received(listener, sendable, tmp_path):
    scp = listener()
    image = next(p for p in sendable if "img_" in p.name)
    ds = pydicom.dcmread(image)
    ds.compress(RLELossless)          # PS3.5 Annex G, encoded by pydicom
    rle = tmp_path / "rle.dcm"
    ds.save_as(rle, enforce_file_format=True)
    report = next(p for p in sendable if "rdsr_" in p.name)
    ae = _client(ds.SOPClassUID, pydicom.dcmread(report).SOPClassUID)
    assoc = ae.associate("127.0.0.1", scp.port, ae_title=scp.ae_title)
    assert assoc.is_established
    try:
        assert assoc.send_c_echo().Status == 0x0000
        assert assoc.send_c_store(rle).Status == 0x0000
        assert assoc.send_c_store(report).Status == 0x0000
        # the inbox cannot be written (the folder of temporary files is in the way): 0xA700,
        # out of resources, and nothing appears under the object's name
        partial = partial_dir(scp.inbox)
        for leftover in partial.iterdir():
            leftover.unlink()
        partial.rmdir()
        partial.write_text("in the way")
        again = pydicom.dcmread(report)
        again.SOPInstanceUID = generate_uid(entropy_srcs=["kerma-test", "write-failure"])
        assert assoc.send_c_store(again).Status == 0xA700
    finally:
        assoc.release()
    stored = scp.inbox / f"{ds.SOPInstanceUID}.dcm"
    assert pydicom.dcmread(stored).file_meta.TransferSyntaxUID == RLELossless
    _same_object(stored, rle)
    assert not (scp.inbox / f"{again.SOPInstanceUID}.dcm").exists()
    assert sorted(p.name for p in scp.inbox.iterdir()) == sorted(
        [f"{ds.SOPInstanceUID}.dcm", f"{sop_uid(report)}.dcm"])
    assert "objects=2 failed=1 outcome=released" in scp.wait_for("outcome=released")


def _self_signed(tmp: Path) -> tuple[Path, Path]:
    """A throw-away certificate for 127.0.0.1 (openssl CLI)."""
    openssl = require_tool("openssl")
    cert, key = tmp / "scp.crt", tmp / "scp.key"
    subprocess.run([openssl, "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "1",
                    "-subj", "/CN=127.0.0.1", "-addext", "subjectAltName=IP:127.0.0.1",
                    "-keyout", str(key), "-out", str(cert)], check=True, capture_output=True)
    return cert, key


def test_tls_association(listener, sendable, tmp_path):
    cert, key = _self_signed(tmp_path)
    scp = listener("--tls-cert", str(cert), "--tls-key", str(key))
    report = next(p for p in sendable if "rdsr_" in p.name)
    context = ssl.create_default_context(ssl.Purpose.SERVER_AUTH, cafile=str(cert))
    ae = _client(pydicom.dcmread(report).SOPClassUID)
    assoc = ae.associate("127.0.0.1", scp.port, ae_title=scp.ae_title,
                         tls_args=(context, "127.0.0.1"))
    assert assoc.is_established
    assert assoc.send_c_store(report).Status == 0x0000
    assoc.release()
    _same_object(scp.inbox / f"{sop_uid(report)}.dcm", report)
    # the same port without TLS: no association, nothing stored
    plain = _client().associate("127.0.0.1", scp.port, ae_title=scp.ae_title)
    assert not plain.is_established
    close_transport(plain)
    assert "with TLS" in scp.log()
    assert len(list(scp.inbox.iterdir())) == 1


def test_sigkill_mid_association_acknowledges_only_what_is_stored(listener, sendable, tmp_path):
    scp = listener()
    report = pydicom.dcmread(next(p for p in sendable if "rdsr_" in p.name))
    acked: list[str] = []
    sent: list[str] = []
    ae = _client(report.SOPClassUID)
    ae.dimse_timeout = ae.network_timeout = 10
    assoc = ae.associate("127.0.0.1", scp.port, ae_title=scp.ae_title)
    assert assoc.is_established
    killed = threading.Event()

    def kill_after(n: int) -> None:
        deadline = time.monotonic() + 60
        while len(acked) < n and time.monotonic() < deadline:
            time.sleep(0.001)
        os.kill(scp.proc.pid, signal.SIGKILL)
        killed.set()

    killer = threading.Thread(target=kill_after, args=(15,), daemon=True)
    killer.start()
    for i in range(400):
        report.SOPInstanceUID = generate_uid(entropy_srcs=["kerma-test", "sigkill", str(i)])
        sent.append(report.SOPInstanceUID)
        status = assoc.send_c_store(report)
        if not assoc.is_established or not status or status.Status != 0x0000:
            break
        acked.append(report.SOPInstanceUID)
    killer.join(timeout=30)
    close_transport(assoc)
    assert killed.is_set() and scp.proc.wait(timeout=10) == -signal.SIGKILL
    assert 15 <= len(acked) < 400
    stored = {p.name[:-4]: p for p in scp.inbox.iterdir()}
    assert set(acked) <= set(stored)                     # nothing acknowledged that is not stored
    assert set(stored) <= set(sent)
    for uid, path in stored.items():                      # and nothing half-written in the inbox
        ds = pydicom.dcmread(path)
        assert ds.SOPInstanceUID == uid and ds.ContentSequence == report.ContentSequence
    # a restart removes the temporary file the killed process may have left beside the inbox
    restarted = listener()
    assert restarted.inbox == scp.inbox
    assert list(partial_dir(scp.inbox).glob("*.tmp")) == []


def test_ingest_every_drains_the_inbox_into_the_warehouse_and_archives(listener, sendable,
                                                                      tmp_path):
    import datetime as dt

    import duckdb

    storescu = require_tool("storescu")
    db = tmp_path / "kerma.duckdb"
    scp = listener("--ingest-every", "1", "--warehouse", str(db))
    store = subprocess.run([storescu, "-aet", CALLING, "-aec", scp.ae_title, "127.0.0.1",
                            str(scp.port), *map(str, sendable)], capture_output=True, text=True,
                           timeout=120)
    assert store.returncode == 0, store.stderr
    day = tmp_path / "archive" / dt.date.today().isoformat()
    deadline = time.monotonic() + 120
    while len(list(day.glob("*.dcm"))) < len(sendable) and time.monotonic() < deadline:
        time.sleep(0.2)
    scp.stop()
    assert "archived=" in scp.log()
    assert sorted(p.name for p in day.iterdir()) == sorted(f"{sop_uid(p)}.dcm" for p in sendable)
    assert list(scp.inbox.iterdir()) == []
    with duckdb.connect(str(db), read_only=True) as con:
        recorded = dict(con.execute(
            "select sop_instance_uid, status from source_object").fetchall())
    assert set(recorded) == {sop_uid(p) for p in sendable}
    assert set(recorded.values()) <= {"loaded", "duplicate"} and "loaded" in recorded.values()


@pytest.mark.external
def test_storescu_deflated_and_compressed_objects_are_stored_as_received(listener, sendable,
                                                                         tmp_path):
    """dcmtk writes a deflated dose SR (dcmconv +td), a JPEG lossless and a JPEG-LS image
    (dcmcjpeg, dcmcjpls); storescu proposes each syntax; each file keeps it."""
    storescu = require_tool("storescu")
    report = next(p for p in sendable if "rdsr_" in p.name)
    images = [p for p in sendable if "img_" in p.name][:2]
    made = {"-xd": (tmp_path / "deflated.dcm", [require_tool("dcmconv"), "+td", report]),
            "-xs": (tmp_path / "jpeg.dcm", [require_tool("dcmcjpeg"), images[0]]),
            "-xt": (tmp_path / "jls.dcm", [require_tool("dcmcjpls"), images[1]])}
    scp = listener()
    for option, (out, command) in made.items():
        subprocess.run([*map(str, command), str(out)], check=True, capture_output=True)
        sent = subprocess.run([storescu, option, "-aec", scp.ae_title, "127.0.0.1",
                               str(scp.port), str(out)], capture_output=True, text=True, timeout=60)
        assert sent.returncode == 0, sent.stderr
    scp.wait_for("outcome=released", count=3)
    syntaxes = {}
    for out, _ in made.values():
        stored = scp.inbox / f"{sop_uid(out)}.dcm"
        _same_object(stored, out)
        syntaxes[out.stem] = pydicom.dcmread(stored).file_meta.TransferSyntaxUID
    assert syntaxes == {"deflated": pydicom.uid.DeflatedExplicitVRLittleEndian,
                        "jpeg": pydicom.uid.JPEGLosslessSV1, "jls": pydicom.uid.JPEGLSLossless}
