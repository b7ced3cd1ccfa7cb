"""Nothing let in: malformed files and hostile strings.

Every malformed input gets a status (stored, or a failure) and never a
crash or a hang; header strings come back as given, as inert JSON text.
Run against build-asan/ by tests/run.sh, where a sanitizer report in the
daemon's log fails the test (conftest.SANITIZER_RE).
"""

import glob
import os
import random
import struct
import urllib.request

import pydicom
import pytest
from pydicom.dataset import Dataset, FileDataset, FileMetaDataset
from pydicom.dataelem import RawDataElement
from pydicom.tag import Tag

import rawscu
from conftest import AE_TITLE, BINARY, echoscu

PYDICOM_TEST_FILES = "/usr/lib/python3/dist-packages/pydicom/data/test_files"
US_IMAGE = "1.2.840.10008.5.1.4.1.1.6.1"
pydicom.config.settings.writing_validation_mode = pydicom.config.IGNORE


def dataset_part(data):
    """The bytes after a Part 10 meta group, or data itself."""
    if len(data) < 144 or data[128:132] != b"DICM":
        return data
    length = struct.unpack_from("<I", data, 140)[0]
    return data[144 + length:]


def raw_store(port, data, sop_class=US_IMAGE, uid="2.25.4242"):
    """One C-STORE of arbitrary bytes: the status, or 'aborted'."""
    try:
        assoc = rawscu.Association("127.0.0.1", port, AE_TITLE, "HOSTILE",
                                   sop_class, timeout=30)
    except (rawscu.AssociationRejected, rawscu.AssociationAborted) as e:
        return "rejected: %s" % e
    try:
        status = assoc.c_store(uid, data)
        assoc.release()
        return status
    except rawscu.AssociationAborted as e:
        assoc.close()
        return "aborted: %s" % e


def own_malformed(sample):
    """Our own bad inputs, built from one good simulator file (seeded)."""
    rng = random.Random(7)
    body = dataset_part(sample)
    cases = {"empty": b"", "one byte": b"\x08",
             "tag only": struct.pack("<HH", 0x0008, 0x0018)}
    for cut in (10, 100, len(body) // 2, len(body) - 1):
        cases["truncated at %d" % cut] = body[:cut]
    for n in range(6):
        flipped = bytearray(body)
        for _ in range(20):
            flipped[rng.randrange(len(flipped))] = rng.randrange(256)
        cases["flipped %d" % n] = bytes(flipped)
    # a length field of 0xFFFFFFF0 on a defined-length value
    cases["huge length"] = struct.pack("<HH", 0x0008, 0x1030) + b"LO" + b"\xff\xff" + b"ab"
    cases["huge UL length"] = struct.pack("<HH2sHI", 0x0008, 0x1030, b"UN", 0, 0xFFFFFFF0) + b"x" * 8
    # 5,000 nested undefined-length sequences (stack depth)
    item = struct.pack("<HHI", 0xFFFE, 0xE000, 0xFFFFFFFF)
    seq = struct.pack("<HH2sHI", 0x0040, 0xA730, b"SQ", 0, 0xFFFFFFFF)
    cases["nested 5000"] = (seq + item) * 5000
    # what the fuzzer found (tests/fuzz/regressions/)
    for path in glob.glob(os.path.join(os.path.dirname(__file__), "..", "fuzz",
                                       "regressions", "*")):
        with open(path, "rb") as f:
            data = f.read()
        cases["fuzz " + os.path.basename(path)] = data
        cases["fuzz data set " + os.path.basename(path)] = dataset_part(data)
    return cases


def test_pydicom_malformed_files_over_import_and_network(daemon_factory, tmp_path):
    # pydicom test data: truncated, bad VR, missing meta header, big endian...
    files = sorted(p for p in glob.glob(PYDICOM_TEST_FILES + "/*")
                   if os.path.isfile(p))
    if not files:
        pytest.skip("python3-pydicom test data not installed")
    daemon = daemon_factory("hostile")
    mark = daemon.mark()
    result = daemon.import_(*files)
    # README (project): import exits 0 when all stored, 1 when anything was
    # rejected; a crash would be a negative code (a signal)
    assert result.returncode in (0, 1), result.stderr[-2000:]
    daemon.start()
    outcomes = {}
    for path in files:
        with open(path, "rb") as f:
            data = f.read()
        name = os.path.basename(path)
        outcomes[name + " (as is)"] = raw_store(daemon.dicom_port, data)
        outcomes[name + " (data set)"] = raw_store(daemon.dicom_port, dataset_part(data))
    daemon.allow_errors_since(mark)
    daemon.allow_errors_since(0)
    print("\n".join("%s: %s" % kv for kv in sorted(outcomes.items())))
    # PS3.4 B.2.3 statuses or an abort (PS3.8 7.3); never a hang (30 s)
    for name, outcome in outcomes.items():
        assert isinstance(outcome, int) or outcome.startswith("aborted"), (name, outcome)
    assert echoscu(daemon.dicom_port).returncode == 0
    status, _ = daemon.get("/healthz")
    assert status == 200


def test_own_malformed_objects(daemon_factory, tmp_path):
    sim = tmp_path / "sim"
    os.system("%s simulate --out %s --days 1 >/dev/null" % (BINARY, sim))
    sample_path = sorted(glob.glob(str(sim) + "/*/*/*.dcm"))[0]
    with open(sample_path, "rb") as f:
        sample = f.read()
    daemon = daemon_factory("own").start()
    mark = daemon.mark()
    outcomes = {name: raw_store(daemon.dicom_port, data)
                for name, data in own_malformed(sample).items()}
    daemon.allow_errors_since(mark)
    print(outcomes)
    for name, outcome in outcomes.items():
        # common practice, no source: a status or an abort, the daemon lives
        assert isinstance(outcome, int) or outcome.startswith("aborted"), (name, outcome)
    assert echoscu(daemon.dicom_port).returncode == 0


HOSTILE = {
    "StationName": "<script>alert(1)</script>",
    "StudyDescription": "'; DROP TABLE instances; -- \"quoted\" & <b>x</b>",
    "ProtocolName": "ctl\x01\x07\x1b[31m\x7f end",
}
LONG = "A" * 10240


def hostile_file(path, values, raw=None):
    ds = Dataset()
    ds.SOPClassUID = US_IMAGE
    ds.SOPInstanceUID = pydicom.uid.generate_uid(prefix="2.25.")
    ds.StudyInstanceUID = pydicom.uid.generate_uid(prefix="2.25.")
    ds.SeriesInstanceUID = pydicom.uid.generate_uid(prefix="2.25.")
    ds.Modality = "US"
    ds.SpecificCharacterSet = "ISO_IR 192"
    ds.MechanicalIndex = "1.1"
    for keyword, value in values.items():
        setattr(ds, keyword, value)
    for keyword, value in (raw or {}).items():
        tag = Tag(keyword)
        vr = pydicom.datadict.dictionary_VR(tag)
        ds[tag] = RawDataElement(tag, vr, len(value), value, 0, False, True)
    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = US_IMAGE
    meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    meta.TransferSyntaxUID = pydicom.uid.ExplicitVRLittleEndian
    f = FileDataset(path, {}, file_meta=meta, preamble=b"\0" * 128)
    f.update(ds)
    f.is_little_endian, f.is_implicit_VR = True, False
    f.save_as(path, write_like_original=False)
    return str(ds.StudyInstanceUID)


def fetch(daemon, path):
    url = "http://127.0.0.1:%d%s" % (daemon.http_port, path)
    with urllib.request.urlopen(url, timeout=10) as response:
        return response.headers, response.read()


def test_hostile_strings_are_stored_as_given_and_inert(daemon_factory, tmp_path):
    daemon = daemon_factory("strings").start()
    cases = [
        (HOSTILE, None, HOSTILE),
        ({k: LONG for k in HOSTILE}, None, {k: LONG for k in HOSTILE}),
        # invalid UTF-8 under ISO_IR 192: 0xFF, a lone continuation byte, a
        # truncated sequence; the extraction shows each as U+FFFD
        ({}, {"StationName": b"ab\xff\x80cd\xe2\x82",
              "StudyDescription": b"ok \xc3\x28 ok "},
         {"StationName": "ab\ufffd\ufffdcd\ufffd",
          "StudyDescription": "ok \ufffd( ok"}),
    ]
    for n, (values, raw, expected) in enumerate(cases):
        path = str(tmp_path / ("h%d.dcm" % n))
        study = hostile_file(path, values, raw)
        result = daemon.storescu([path])
        assert result.returncode == 0, result.stderr
        headers, body = fetch(daemon, "/api/v1/instances?study=" + study)
        # RFC 8259 8.1: JSON text exchanged is UTF-8; this parses it strictly
        text = body.decode("utf-8")
        import json
        rows = json.loads(text)
        rows = rows["instances"] if isinstance(rows, dict) else rows
        assert len(rows) == 1
        row = rows[0]
        for keyword, value in expected.items():
            column = {"StationName": "station_name", "StudyDescription":
                      "study_description", "ProtocolName": "protocol_name"}[keyword]
            # design rule: stored as given (DICOM padding aside, PS3.5 6.2)
            assert row[column].rstrip(" ") == value.rstrip(" "), (column, row[column][:80])
        # served as JSON, never sniffed as HTML (WHATWG Fetch: nosniff)
        assert headers["Content-Type"].startswith("application/json")
        assert headers["X-Content-Type-Options"] == "nosniff"
        assert b"<script>" not in body or b'"<script>' in body  # inside a JSON string
    with daemon.db() as db:
        # the SQL fragment did nothing: the table is there and holds them all
        assert db.execute("SELECT count(*) FROM instances").fetchone()[0] == len(cases)
