"""What a C-STORE must be before it is stored, and what a hostile one can
cost: invalid UIDs and objects that are not what their command announces
are refused with a failure status and a rejection row; an object past
max_object_bytes is discarded while it arrives; the quarantine keeps to its
quota; no value can write a line of its own into the log.
"""

import os
import re
import struct
import time

import pydicom
from pydicom.dataset import Dataset

import rawscu
from conftest import AE_TITLE, echoscu

US_IMAGE = "1.2.840.10008.5.1.4.1.1.6.1"
SC_IMAGE = "1.2.840.10008.5.1.4.1.1.7"
pydicom.config.settings.writing_validation_mode = pydicom.config.IGNORE


def dataset_bytes(sop_instance_uid, sop_class_uid=US_IMAGE, study="2.25.71",
                  series="2.25.72", extra=None):
    """A small ultrasound data set, explicit VR little endian, no meta."""
    ds = Dataset()
    ds.SOPClassUID = sop_class_uid
    ds.SOPInstanceUID = sop_instance_uid
    ds.StudyInstanceUID = study
    ds.SeriesInstanceUID = series
    ds.Modality = "US"
    ds.MechanicalIndex = "1.1"
    for keyword, value in (extra or {}).items():
        setattr(ds, keyword, value)
    fp = pydicom.filebase.DicomBytesIO()
    fp.is_little_endian, fp.is_implicit_VR = True, False
    pydicom.filewriter.write_dataset(fp, ds)
    return fp.getvalue()


def store(port, command_uid, data, sop_class=US_IMAGE, calling="CHECKS"):
    assoc = rawscu.Association("127.0.0.1", port, AE_TITLE, calling, sop_class)
    try:
        return assoc.c_store(command_uid, data)
    finally:
        assoc.release()


def instance_uids(daemon):
    with daemon.db() as db:
        return {row[0] for row in db.execute("SELECT sop_instance_uid FROM instances")}


def rejection_count(daemon):
    with daemon.db() as db:
        return db.execute("SELECT count(*) FROM rejections").fetchone()[0]


def is_failure(status):
    # PS3.7 C.1: failure statuses are A000-AFFF, C000-CFFF and 01xx/02xx
    return 0xA000 <= status <= 0xCFFF or 0x0100 <= status <= 0x02FF


def test_invalid_uids_are_refused_with_a_failure_and_a_rejection(daemon_factory):
    daemon = daemon_factory("uids").start()
    mark = daemon.mark()
    cases = {
        "path": ("SOPInstanceUID", "../../tmp/x"),
        "newline": ("SOPInstanceUID", "1.2.3\n4"),
        "leading zero": ("SOPInstanceUID", "1.2.03.4"),
        "empty component": ("SOPInstanceUID", "1.2..4"),
        "65 bytes": ("SOPInstanceUID", "1." + "2" * 63),
        "study": ("StudyInstanceUID", "1.2.3.abc"),
        "series": ("SeriesInstanceUID", "1.2.3.4/5"),
    }
    for n, (name, (keyword, value)) in enumerate(cases.items()):
        sop = value if keyword == "SOPInstanceUID" else "2.25.9100%d" % n
        uids = dict(sop_instance_uid=sop)
        if keyword == "StudyInstanceUID":
            uids["study"] = value
        if keyword == "SeriesInstanceUID":
            uids["series"] = value
        # DCMTK itself refuses a command UID over 64 bytes (an abort), so the
        # command names a valid one there
        command_uid = sop if len(sop) <= 64 else "2.25.91999"
        status = store(daemon.dicom_port, command_uid, dataset_bytes(**uids))
        # PS3.5 9.1: a UID is digits and dots, no leading zero in a
        # component, at most 64 bytes; never answered Success (PS3.4 B.2.3)
        assert is_failure(status), (name, hex(status))
    # a valid one next to them is stored: the checks refuse only the bad
    assert store(daemon.dicom_port, "2.25.9199", dataset_bytes("2.25.9199")) == 0
    assert instance_uids(daemon) == {"2.25.9199"}
    assert rejection_count(daemon) == len(cases)
    daemon.allow_errors_since(mark)


def test_object_other_than_announced_is_refused_with_a900(daemon_factory):
    daemon = daemon_factory("mismatch").start()
    mark = daemon.mark()
    # the instance the mismatched objects name is stored first
    assert store(daemon.dicom_port, "2.25.9301", dataset_bytes("2.25.9301")) == 0
    # command says 2.25.9302, the data set is 2.25.9301 (would replace it)
    status = store(daemon.dicom_port, "2.25.9302",
                   dataset_bytes("2.25.9301", extra={"StationName": "IMPOSTOR"}))
    # PS3.4 B.2.3: A900 Error: Data Set does not match SOP Class (DCMTK's
    # storescp answers both UID mismatches so)
    assert status == 0xA900
    # command class US Image, data set class Secondary Capture
    status = store(daemon.dicom_port, "2.25.9303",
                   dataset_bytes("2.25.9303", sop_class_uid=SC_IMAGE))
    assert status == 0xA900
    assert instance_uids(daemon) == {"2.25.9301"}
    with daemon.db() as db:
        station = db.execute("SELECT station_name FROM instances").fetchone()[0]
    assert station != "IMPOSTOR"
    assert rejection_count(daemon) == 2
    daemon.allow_errors_since(mark)


def test_control_characters_cannot_forge_log_lines(daemon_factory):
    daemon = daemon_factory("forge").start()
    mark = daemon.mark()
    forged = "\n2026-01-01T00:00:00.000Z info: FORGED"
    # calling AE title with a newline (sent raw; PS3.8 9.3.2 allows only
    # printable characters, the receiver must not trust it)
    store(daemon.dicom_port, "2.25.9401" + forged,
          dataset_bytes("2.25.9401" + forged), calling="EVIL\nFORGED")
    daemon.allow_errors_since(mark)
    log = daemon.log()[mark:]
    # common practice, no source: one event, one line; the control
    # character is shown escaped
    assert not any(line.startswith("FORGED") or line.startswith("2026-01-01")
                   for line in log.splitlines()), log
    assert "\\x0a" in log


def oversized_stream(assoc, sop_instance_uid, total, pause_at):
    """Sends a C-STORE of an object of total bytes (one OB element), pausing
    after pause_at bytes until resume is set; returns the status."""
    command = rawscu._command({
        0x0002: rawscu._uid(US_IMAGE),
        0x0100: struct.pack("<H", 0x0001),
        0x0110: struct.pack("<H", 1),
        0x0700: struct.pack("<H", 0),
        0x0800: struct.pack("<H", 0x0000),
        0x1000: rawscu._uid(sop_instance_uid),
    })
    head = dataset_bytes(sop_instance_uid)
    pixel_length = total - len(head) - 12
    pixel_length -= pixel_length % 2
    head += struct.pack("<HH2sHI", 0x7FE0, 0x0010, b"OB", 0, pixel_length)
    assoc._send_pdvs(command, True)
    chunk = 16372
    sent = 0
    body = head + b"\0" * (chunk - len(head))
    zeros = b"\0" * chunk
    remaining = len(head) + pixel_length
    first = True
    while remaining > 0:
        piece = body if first else zeros
        piece = piece[:remaining]
        first = False
        remaining -= len(piece)
        last = remaining == 0
        pdv = struct.pack(">IBB", len(piece) + 2, assoc.pcid, 0x02 if last else 0x00) + piece
        assoc._send_pdu(0x04, pdv)
        sent += len(piece)
        if pause_at is not None and sent >= pause_at:
            pause_at = None
            yield "paused"
    yield "sent"


def memory_file_bytes(pid):
    """Bytes held by the daemon's memory files (memfd_create), from the
    allocated blocks of each one's descriptor."""
    seen = {}
    folder = "/proc/%d/fd" % pid
    for name in os.listdir(folder):
        try:
            if os.readlink(os.path.join(folder, name)).startswith("/memfd:"):
                info = os.stat(os.path.join(folder, name))
                # a file open twice (DCMTK writes it through its own
                # descriptor) is counted once
                seen[info.st_ino] = info.st_blocks * 512
        except OSError:
            pass
    return sum(seen.values())


def test_max_object_bytes_is_enforced_while_receiving(daemon_factory):
    limit = 1024 * 1024
    daemon = daemon_factory("big", dicom=dict(max_object_bytes=limit)).start()
    mark = daemon.mark()
    assoc = rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "BIG", US_IMAGE)
    sender = oversized_stream(assoc, "2.25.9501", 48 * 1024 * 1024, 24 * 1024 * 1024)
    assert next(sender) == "paused"
    # the receiver drains what was sent (bounded wait on the socket)
    held, previous = 0, -1
    for _ in range(100):
        held = memory_file_bytes(daemon.process.pid)
        if held == previous:
            break
        previous = held
        time.sleep(0.1)
    # 24 MB sent of a 48 MB object with a 1 MB limit: the association holds
    # at most the limit plus a fragment (common practice, no source)
    assert held <= limit + 256 * 1024, held
    assert next(sender) == "sent"
    # PS3.4 B.2.3: Cxxx, the failure this receiver answers for a too-large
    # object (docs/conformance.md)
    received = b""
    while True:
        pdu_type, payload = assoc._read_pdu()
        offset = 0
        done = False
        while offset + 6 <= len(payload):
            length, _, header = struct.unpack_from(">IBB", payload, offset)
            received += payload[offset + 6:offset + 4 + length]
            offset += 4 + length
            done = done or header & 0x03 == 0x03
        if done:
            break
    status = struct.unpack("<H", rawscu._parse_command(received)[(0x0000, 0x0900)])[0]
    assert status == 0xC001
    # the association goes on: a small object after it is stored
    assert assoc.c_store("2.25.9502", dataset_bytes("2.25.9502"), message_id=2) == 0
    assoc.release()
    assert instance_uids(daemon) == {"2.25.9502"}
    daemon.allow_errors_since(mark)


def read_status(assoc):
    received = b""
    while True:
        pdu_type, payload = assoc._read_pdu()
        offset = 0
        done = False
        while offset + 6 <= len(payload):
            length, _, header = struct.unpack_from(">IBB", payload, offset)
            received += payload[offset + 6:offset + 4 + length]
            offset += 4 + length
            done = done or header & 0x03 == 0x03
        if done:
            return struct.unpack("<H", rawscu._parse_command(received)[(0x0000, 0x0900)])[0]


def settled_memory_file_bytes(daemon):
    """Memory file bytes once the receiver has drained its socket."""
    held, previous = 0, -1
    for _ in range(100):
        held = memory_file_bytes(daemon.process.pid)
        if held == previous:
            break
        previous = held
        time.sleep(0.1)
    return held


def test_objects_in_flight_keep_to_the_memory_budget(daemon_factory):
    budget = 8 * 1024 * 1024
    daemon = daemon_factory("budget", dicom=dict(
        max_object_bytes=64 * 1024 * 1024, max_memory_in_flight_bytes=budget)).start()
    mark = daemon.mark()
    first = rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "FIRST", US_IMAGE)
    second = rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "SECOND", US_IMAGE)
    a = oversized_stream(first, "2.25.9701", 12 * 1024 * 1024, 6 * 1024 * 1024)
    b = oversized_stream(second, "2.25.9702", 12 * 1024 * 1024, 6 * 1024 * 1024)
    assert next(a) == "paused"
    settled_memory_file_bytes(daemon)  # the first half of the first is in
    assert next(b) == "paused"
    # two 6 MB halves against an 8 MB budget: the second is being discarded
    # (common practice, no source: a budget is a bound on the sum)
    assert settled_memory_file_bytes(daemon) <= budget + 512 * 1024
    assert next(a) == "sent"
    assert next(b) == "sent"
    # the first, alone over the budget, is stored; the second gets A700
    # (PS3.4 B.2.3: Refused, out of resources; the sender retries)
    assert read_status(first) == 0x0000
    assert read_status(second) == 0xA700
    first.release()
    second.release()
    daemon.allow_errors_since(mark)


def test_quarantine_keeps_to_its_quota_and_valid_objects_still_store(daemon_factory):
    daemon = daemon_factory("quota", storage=dict(
        quarantine_max_files=5, quarantine_max_bytes=10 * 1024 * 1024)).start()
    mark = daemon.mark()
    folder = os.path.join(daemon.data_directory, "quarantine")
    for n in range(12):
        garbage = os.urandom(600 * 1024)
        status = store(daemon.dicom_port, "2.25.96%02d" % n, garbage)
        assert status == 0xC000, hex(status)
    files = os.listdir(folder)
    # the quota: at most 5 files and 10 MB, the newest kept
    assert len(files) <= 5
    assert sum(os.path.getsize(os.path.join(folder, f)) for f in files) <= 10 * 1024 * 1024
    # an object larger than the byte quota is not kept at all
    assert store(daemon.dicom_port, "2.25.9690", os.urandom(11 * 1024 * 1024)) == 0xC000
    assert len(os.listdir(folder)) <= 5
    # a valid object is stored Success whatever the quarantine holds
    assert store(daemon.dicom_port, "2.25.9699", dataset_bytes("2.25.9699")) == 0
    log = daemon.log()[mark:]
    assert re.search(r"quarantine quota .* removed the \d+ oldest", log)
    assert echoscu(daemon.dicom_port).returncode == 0
    daemon.allow_errors_since(mark)
