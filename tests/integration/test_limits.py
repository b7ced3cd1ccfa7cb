"""Limits that protect the process, each configured and observed: maximum
object size, SR depth, concurrent associations, PDU size, ACSE and DIMSE
timeouts."""

import os
import socket
import time

import pydicom
import pytest

import rawscu
from conftest import AE_TITLE, BINARY
from sending import simulated_files, storescu_statuses

US_IMAGE = "1.2.840.10008.5.1.4.1.1.6.1"


@pytest.fixture(scope="module")
def sim(tmp_path_factory):
    files, rows = simulated_files(BINARY, tmp_path_factory.mktemp("sim"), 1)
    return files, rows


def test_max_object_bytes(daemon_factory, sim):
    files, rows = sim
    by_size = sorted(files, key=os.path.getsize)
    small, large = by_size[0], by_size[-1]
    limit = (os.path.getsize(small) + os.path.getsize(large)) // 2
    daemon = daemon_factory("size", dicom=dict(max_object_bytes=limit)).start()
    statuses = storescu_statuses(daemon.dicom_port, [small, large])
    assert statuses[small] == "Success"
    # PS3.4 B.2.3: Cxxx "Error: Cannot understand" (docs/conformance.md: C001
    # for an object over max_object_bytes, a failure not to retry)
    assert statuses[large].startswith("Error"), statuses
    assert "refused (0xC001)" in daemon.log()
    with daemon.db() as db:
        stored = {u for (u,) in db.execute("SELECT sop_instance_uid FROM instances")}
    assert rows[large]["sop_instance_uid"] not in stored
    # received into memory and dropped: nothing of it reached the disk
    kept = [os.path.join(folder, name)
            for folder, _, names in os.walk(daemon.data_directory)
            for name in names if not name.startswith("mitilog.sqlite3")]
    assert kept == []


def nested_sr(source, path, levels):
    """The SR source with its content wrapped in levels more CONTAINERs
    (PS3.3 C.17.3: CONTAINER CONTAINS CONTAINER is allowed)."""
    from pydicom.dataset import Dataset
    ds = pydicom.dcmread(source)
    content = ds.ContentSequence
    for level in range(levels):
        code = Dataset()
        code.CodeValue, code.CodingSchemeDesignator = "%d" % (level + 1), "99MITI"
        code.CodeMeaning = "level %d" % (level + 1)
        item = Dataset()
        item.RelationshipType, item.ValueType = "CONTAINS", "CONTAINER"
        item.ConceptNameCodeSequence = [code]
        item.ContinuityOfContent = "SEPARATE"
        item.ContentSequence = content
        content = [item]
    ds.ContentSequence = content
    ds.SOPInstanceUID = pydicom.uid.generate_uid(prefix="2.25.")
    ds.file_meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    ds.save_as(path)
    return path


def test_sr_depth_limit(daemon_factory, sim, tmp_path):
    files, _ = sim
    srs = [f for f in files if str(pydicom.dcmread(f, stop_before_pixels=True)
                                   .SOPClassUID).startswith("1.2.840.10008.5.1.4.1.1.88.")]
    assert srs, "the simulator writes acoustic output SRs"
    deep = nested_sr(srs[0], str(tmp_path / "deep.dcm"), 4)
    daemon = daemon_factory("srdepth", storage=dict(sr_depth_limit=2)).start()
    statuses = storescu_statuses(daemon.dicom_port, [deep])
    assert set(statuses.values()) == {"Success"}
    # design rule: the SR walk stops at the configured depth, and says so
    assert "deeper than 2 levels" in daemon.log()


def test_max_associations_refuses_extra_ones(daemon_factory):
    daemon = daemon_factory("assocs", dicom=dict(max_associations=2)).start()
    held = [rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "HOLD%d" % i,
                               US_IMAGE) for i in range(2)]
    mark = daemon.mark()
    # PS3.8 9.3.4 A-ASSOCIATE-RJ; DCMTK: "Local Limit Exceeded"
    with pytest.raises((rawscu.AssociationRejected, rawscu.AssociationAborted)):
        rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "EXTRA", US_IMAGE)
    daemon.allow_errors_since(mark)
    for a in held:
        a.release()
    time.sleep(0.5)
    again = rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "AFTER", US_IMAGE)
    again.release()
    assert "EXTRA" in daemon.log()[mark:]


def test_max_pdu_is_announced(daemon_factory):
    daemon = daemon_factory("pdu", dicom=dict(max_pdu_bytes=16384)).start()
    a = rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "PDU", US_IMAGE)
    # PS3.8 D.1: the A-ASSOCIATE-AC carries the acceptor's maximum length
    assert a.max_pdu == 16384
    a.release()


def test_acse_timeout_closes_a_silent_connection(daemon_factory):
    daemon = daemon_factory("acse", dicom=dict(acse_timeout_seconds=2)).start()
    started = time.monotonic()
    with socket.create_connection(("127.0.0.1", daemon.dicom_port), timeout=20) as s:
        data = s.recv(100)  # nothing sent: the daemon gives up on us
    # design rule: association timeout configurable (PS3.8 9.1.5 ARTIM)
    assert data == b"" or data[0] == 0x07
    assert time.monotonic() - started < 10
    assert echo_ok(daemon)


def test_dimse_timeout_aborts_an_idle_association(daemon_factory):
    daemon = daemon_factory("dimse", dicom=dict(dimse_timeout_seconds=2)).start()
    a = rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "IDLE", US_IMAGE,
                           timeout=20)
    started = time.monotonic()
    mark = daemon.mark()
    with pytest.raises(rawscu.AssociationAborted):
        a._read_pdu()
    daemon.allow_errors_since(mark)
    assert time.monotonic() - started < 10
    a.close()
    assert echo_ok(daemon)


def echo_ok(daemon):
    from conftest import echoscu
    return echoscu(daemon.dicom_port).returncode == 0
