"""The spine of mitilog end to end: receive over DICOM, store, serve JSON.

Every attribute value is checked against pydicom's reading of the same
file (pydicom is the independent parser; mitilog reads with DCMTK).
"""

import datetime
import glob
import os
import re
import shutil
import struct
import subprocess
import threading
import time

import pydicom
import pytest
from pydicom import config as pydicom_config
from pydicom.valuerep import DA, DT, TM, is_valid_ds

import rawscu
from conftest import AE_TITLE, BINARY, echoscu, run

pydicom_config.settings.reading_validation_mode = pydicom_config.IGNORE

INDEX_TAGS = {
    "mi": 0x00185022, "tis": 0x00185027, "tib": 0x00185024,
    "tic": 0x00185026, "tis_focus": 0x00185028, "tis_surface": 0x00185029,
}
# reference: the project's docs/domain.md section 2 (storage SOP classes)
US_SOP_CLASSES = {"1.2.840.10008.5.1.4.1.1.6.1", "1.2.840.10008.5.1.4.1.1.3.1",
                  "1.2.840.10008.5.1.4.1.1.6.2"}
ISO_RE = re.compile(r"^(\d{4})-(\d\d)-(\d\d)T(\d\d):(\d\d):(\d\d)(?:\.(\d{1,6}))?$")


# --------------------------------------------------------------------------
# The reference reading (pydicom)
# --------------------------------------------------------------------------

def reference_index(ds, tag):
    """(status, value, raw) of a DS index from pydicom's raw bytes.

    reference: DICOM PS3.5 6.2 (DS: at most 16 bytes, fixed or floating
    point, leading/trailing spaces not significant) as implemented by
    pydicom.valuerep.is_valid_ds; VM 1 for these attributes (PS3.6), so a
    backslash (two values) is invalid."""
    element = ds.get_item(tag)  # raw element, value still undecoded bytes
    if element is None:
        return "missing", None, None
    value = element.value
    if value is None:
        value = b""  # pydicom gives None for a zero-length value
    raw = value.decode("latin-1") if isinstance(value, bytes) else str(value)
    text = raw.strip(" \0")
    if text == "":
        return "missing", None, raw
    if "\\" in text or not is_valid_ds(text):
        return "invalid", None, raw
    return "ok", float(text), raw


def text_value(ds, keyword):
    if keyword not in ds:
        return None
    value = ds.data_element(keyword).value
    if value is None:
        return ""
    return str(value)


def reference_acquired_at(ds):
    """The acquisition time with the interface's fall-backs, from pydicom's
    DA/TM/DT parsing: AcquisitionDateTime, AcquisitionDate+Time,
    ContentDate+Time, InstanceCreationDate+Time, StudyDate+Time."""
    if ds.get("AcquisitionDateTime"):
        return "acquisition_date_time", DT(ds.AcquisitionDateTime)
    for prefix in ("Acquisition", "Content", "InstanceCreation", "Study"):
        date, time_ = ds.get(prefix + "Date"), ds.get(prefix + "Time")
        if date and time_:
            return prefix, datetime.datetime.combine(DA(date), TM(time_))
    return None, None


def parse_iso(text):
    m = ISO_RE.match(text or "")
    assert m, "acquired_at %r is not YYYY-MM-DDTHH:MM:SS[.ffffff]" % text
    y, mo, d, h, mi, s, frac = m.groups()
    micro = int((frac or "0").ljust(6, "0"))
    return datetime.datetime(int(y), int(mo), int(d), int(h), int(mi), int(s),
                             micro)


def reference(path):
    """What mitilog should report for the file, read with pydicom."""
    ds = pydicom.dcmread(path)
    indices = {k: reference_index(ds, t) for k, t in INDEX_TAGS.items()}
    source, acquired = reference_acquired_at(ds)
    frames = ds.get("NumberOfFrames")
    frame_time = ds.get("FrameTime")
    return dict(
        sop_instance_uid=str(ds.SOPInstanceUID),
        study_instance_uid=str(ds.StudyInstanceUID),
        series_instance_uid=str(ds.SeriesInstanceUID),
        sop_class_uid=str(ds.SOPClassUID),
        modality=text_value(ds, "Modality"),
        station_name=text_value(ds, "StationName"),
        institutional_department_name=text_value(
            ds, "InstitutionalDepartmentName"),
        study_description=text_value(ds, "StudyDescription"),
        protocol_name=text_value(ds, "ProtocolName"),
        number_of_frames=int(frames) if frames not in (None, "") else None,
        frame_time_ms=float(frame_time) if frame_time not in (None, "") else None,
        transfer_syntax_uid=str(ds.file_meta.TransferSyntaxUID),
        is_ultrasound=(ds.get("Modality") == "US"
                       or str(ds.SOPClassUID) in US_SOP_CLASSES),
        acquired_at=acquired,
        acquired_at_source=source,
        indices=indices,
    )


def assert_matches(row, ref, calling_ae, label):
    """Compares one API instance object with the pydicom reference."""
    problems = []

    def check(key, expected, actual):
        if expected != actual:
            problems.append("%s: expected %r, mitilog %r" % (key, expected, actual))

    for key in ("sop_instance_uid", "study_instance_uid", "series_instance_uid",
                "sop_class_uid", "modality", "transfer_syntax_uid",
                "number_of_frames"):
        check(key, ref[key], row.get(key))
    for key in ("station_name", "institutional_department_name",
                "study_description", "protocol_name"):
        expected = ref[key]
        actual = row.get(key)
        if expected == "" and actual is None:
            continue  # empty and absent are the same fact
        check(key, expected, actual)
    if ref["frame_time_ms"] is None:
        check("frame_time_ms", None, row.get("frame_time_ms"))
    elif row.get("frame_time_ms") != pytest.approx(ref["frame_time_ms"]):
        check("frame_time_ms", ref["frame_time_ms"], row.get("frame_time_ms"))
    check("is_ultrasound", ref["is_ultrasound"], bool(row.get("is_ultrasound")))
    check("calling_ae_title", calling_ae, row.get("calling_ae_title"))
    try:
        got = parse_iso(row.get("acquired_at"))
        check("acquired_at", ref["acquired_at"], got)
    except AssertionError as e:
        problems.append(str(e))
    for name, (status, value, raw) in ref["indices"].items():
        check("index_status." + name, status,
              (row.get("index_status") or {}).get(name))
        actual = row.get(name)
        if status == "ok":
            if not isinstance(actual, (int, float)) or actual != pytest.approx(value, rel=1e-9):
                check(name, value, actual)
        else:
            check(name, None, actual)
        actual_raw = (row.get("index_raw") or {}).get(name)
        # Raw text kept for the audit; DICOM padding (leading/trailing
        # spaces, PS3.5 6.2) is not significant, so compare without it.
        if raw is None:
            check("index_raw." + name, None, actual_raw)
        elif (actual_raw or "").strip(" \0") != raw.strip(" \0"):
            check("index_raw." + name, raw, actual_raw)
    assert not problems, "%s:\n  %s" % (label, "\n  ".join(problems))


def stored_fixtures(fixtures):
    return [f for f in fixtures["manifest"] if f["expect"] == "stored"]


def send_all(daemon, entries):
    """Two senders at once (SENDER1, SENDER2), each with half of every
    transfer syntax group, each group with the storescu options that propose
    its own transfer syntax (storescu --help: -R plus -x?). Returns
    {sop_instance_uid: calling AE}."""
    groups = {}
    for entry in entries:
        groups.setdefault(tuple(entry["storescu_options"]), []).append(entry)
    jobs = {"SENDER1": [], "SENDER2": []}
    sent_by = {}
    for options, members in groups.items():
        for i, sender in enumerate(("SENDER1", "SENDER2")):
            half = members[i::2]
            if half:
                jobs[sender].append((options, [e["path"] for e in half]))
                for e in half:
                    sent_by[e["sop_instance_uid"]] = sender
    results = []

    def worker(sender):
        for options, files in jobs[sender]:
            results.append((sender, options, files,
                            daemon.storescu(files, calling=sender,
                                            options=options)))

    threads = [threading.Thread(target=worker, args=(s,)) for s in jobs]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for sender, options, files, result in results:
        assert result.returncode == 0, "storescu %s %s %s failed:\n%s\n%s" % (
            sender, options, files, result.stdout, result.stderr)
    return sent_by


# --------------------------------------------------------------------------
# The shared daemon: every fixture received once over the network
# --------------------------------------------------------------------------

@pytest.fixture(scope="module")
def spine(module_daemon_factory, fixtures):
    daemon = module_daemon_factory("spine", storage=dict(retention="header"))
    daemon.start()
    entries = stored_fixtures(fixtures)
    daemon.sent_by = send_all(daemon, entries)
    daemon.entries = entries
    return daemon


def instances_of_study(daemon, study_uid):
    return daemon.get_json("/api/v1/instances?study=" + study_uid)


def test_fixtures_cover_the_cases(fixtures):
    # common practice, no source: the fixture set is what the tests claim
    names = {f["name"] for f in fixtures["manifest"]}
    for name in ("us_single_explicit", "us_multiframe", "us_implicit",
                 "us_big_endian", "us_deflated", "us_value_forms",
                 "us_invalid_a", "us_invalid_b", "us_latin1", "sc_image",
                 "comprehensive_sr", "truncated.dcm", "text.dcm",
                 "empty.dcm", "preamble_random.dcm"):
        assert name in names
    if "us_jpeg_baseline" not in names:
        pytest.skip("JPEG fixture skipped: %s" % fixtures["skipped"])
    sources = {reference(f["path"])["acquired_at_source"]
               for f in stored_fixtures(fixtures)}
    assert sources == {"acquisition_date_time", "Acquisition", "Content",
                       "InstanceCreation", "Study"}


def test_manifest_agrees_with_pydicom(fixtures):
    # The generator's stated intent and the independent reading agree, so
    # a pydicom quirk cannot silently change what the other tests expect.
    # reference: pydicom reads the same file
    for entry in stored_fixtures(fixtures):
        ref = reference(entry["path"])
        for name, expected in entry["indices"].items():
            status, value, raw = ref["indices"][name]
            assert status == expected["status"], (entry["name"], name, status)
            if status == "ok":
                assert value == pytest.approx(expected["value"])
            if expected["raw"] is not None:
                assert raw.strip(" \0") == expected["raw"].strip(), (entry["name"], name, raw)


def test_well_formed_fixtures_pass_dciodvfy(fixtures, tmp_path):
    # reference: dciodvfy (dicom3tools) checks each file against its IOD;
    # its exit status is not reliable, so assert on its output.
    for entry in fixtures["manifest"]:
        if entry["group"] != "good":
            continue
        path = entry["path"]
        if entry["transfer_syntax_uid"] == pydicom.uid.DeflatedExplicitVRLittleEndian:
            # dciodvfy cannot read deflated files: inflate with DCMTK's
            # dcmconv (+te: explicit little endian) and check that copy.
            inflated = str(tmp_path / (entry["name"] + ".inflated.dcm"))
            conv = run(["dcmconv", "+te", path, inflated])
            assert conv.returncode == 0, conv.stderr
            path = inflated
        result = run(["dciodvfy", path])
        errors = [l for l in (result.stdout + result.stderr).splitlines()
                  if "Error" in l]
        assert not errors, "%s:\n%s" % (entry["name"], "\n".join(errors))


def test_invalid_fixtures_are_flagged_by_dciodvfy(fixtures):
    # reference: dciodvfy (dicom3tools) sees the deliberately invalid DS
    for entry in fixtures["manifest"]:
        if entry["group"] != "odd":
            continue
        result = run(["dciodvfy", entry["path"]])
        assert "Error" in result.stdout + result.stderr, entry["name"]


def test_echo(spine):
    # reference: DICOM PS3.7 9.3.5 (C-ECHO), answered by DCMTK's echoscu
    result = echoscu(spine.dicom_port)
    assert result.returncode == 0, result.stderr


def test_wrong_called_ae_is_refused(spine):
    # reference: DICOM PS3.8 9.3.4 A-ASSOCIATE-RJ reason 7 "called AE title
    # not recognized"; echoscu exits non-zero when the association fails
    start = spine.mark()
    result = echoscu(spine.dicom_port, called="NOT-MITILOG")
    spine.allow_errors_since(start)
    assert result.returncode != 0
    assert "Association Rejected" in result.stderr, result.stderr


def test_calling_ae_allowlist(daemon_factory):
    # reference: DICOM PS3.8 9.3.4 A-ASSOCIATE-RJ reason 3 "calling AE title
    # not recognized"
    daemon = daemon_factory(
        "allow", dicom=dict(allowed_calling_ae_titles="SENDER1, SENDER2@127.0.0.1"))
    daemon.start()
    assert echoscu(daemon.dicom_port, calling="SENDER1").returncode == 0
    assert echoscu(daemon.dicom_port, calling="SENDER2").returncode == 0
    start = daemon.mark()
    refused = echoscu(daemon.dicom_port, calling="OTHER")
    time.sleep(0.3)
    daemon.allow_errors_since(start)
    assert refused.returncode != 0, refused.stdout + refused.stderr
    assert "OTHER" in daemon.log()[start:], daemon.log()


def test_every_fixture_matches_pydicom(spine):
    studies = {e["study_instance_uid"] for e in spine.entries}
    rows = {}
    for study in studies:
        for row in instances_of_study(spine, study):
            assert row["study_instance_uid"] == study
            assert row["sop_instance_uid"] not in rows, "duplicate row"
            rows[row["sop_instance_uid"]] = row
    assert set(rows) == {e["sop_instance_uid"] for e in spine.entries}
    failures = []
    for entry in spine.entries:
        ref = reference(entry["path"])  # reference: pydicom reads the same file
        try:
            assert_matches(rows[ref["sop_instance_uid"]], ref,
                           spine.sent_by[ref["sop_instance_uid"]], entry["name"])
            assert rows[ref["sop_instance_uid"]]["replaced_count"] == 0
        except AssertionError as e:
            failures.append(str(e))
    assert not failures, "\n".join(failures)


def test_acquired_at_sources_are_distinct(spine):
    # The five fall-backs are five different sources; names are mitilog's.
    by_ref = {}
    for entry in spine.entries:
        ref = reference(entry["path"])
        if not ref["is_ultrasound"]:
            continue
        row = [r for r in instances_of_study(spine, ref["study_instance_uid"])
               if r["sop_instance_uid"] == ref["sop_instance_uid"]][0]
        by_ref.setdefault(ref["acquired_at_source"], set()).add(
            row["acquired_at_source"])
    for source, names in by_ref.items():
        assert len(names) == 1, (source, names)
    assert len({next(iter(n)) for n in by_ref.values()}) == len(by_ref), by_ref


def test_healthz(spine):
    # common practice, no source: a health endpoint with counts
    status, body = spine.get("/healthz")
    assert status == 200
    assert body["status"] == "ok"
    assert body["database"] == "ok"
    assert body["schema_version"] >= 1
    assert body["instances"] >= len(spine.entries)
    assert body["studies"] >= len({e["study_instance_uid"] for e in spine.entries})
    assert isinstance(body["rejections"], int)


def test_http_errors(spine):
    # reference: RFC 9110 15.5.5 (404 Not Found), 15.5.1 (400 Bad Request)
    status, body = spine.get("/no/such/path")
    assert status == 404
    assert isinstance(body, dict) and "error" in body
    status, body = spine.get("/api/v1/instances?limit=abc")
    assert status == 400
    assert isinstance(body, dict) and "error" in body


def test_studies_summary(spine):
    studies = spine.get_json("/api/v1/studies?from=2026-01-01&to=2026-12-31")
    by_uid = {s["study_instance_uid"]: s for s in studies}
    refs = {}
    for entry in spine.entries:
        ref = reference(entry["path"])  # reference: pydicom reads the same file
        refs.setdefault(ref["study_instance_uid"], []).append(ref)
    problems = []
    for study, members in refs.items():
        if study not in by_uid:
            problems.append("study %s missing" % study)
            continue
        got = by_uid[study]
        if got["instance_count"] != len(members):
            problems.append("%s instance_count %r != %d" % (study, got["instance_count"], len(members)))
        for name in INDEX_TAGS:
            values = [m["indices"][name][1] for m in members
                      if m["indices"][name][0] == "ok"]
            expected = max(values) if values else None
            actual = got.get("max_" + name)
            if expected is None:
                ok = actual is None
            else:
                ok = isinstance(actual, (int, float)) and actual == pytest.approx(expected)
            if not ok:
                problems.append("%s max_%s %r != %r" % (study, name, actual, expected))
        times = [m["acquired_at"] for m in members]
        for key, expected in (("first_acquired_at", min(times)),
                              ("last_acquired_at", max(times))):
            try:
                if parse_iso(got.get(key)) != expected:
                    problems.append("%s %s %r != %s" % (study, key, got.get(key), expected))
            except AssertionError as e:
                problems.append("%s %s" % (study, e))
        if got.get("study_description") != members[0]["study_description"]:
            problems.append("%s study_description %r" % (study, got.get("study_description")))
    assert not problems, "\n".join(problems)
    # reference: the request's own date range; a range before 2026 is empty
    earlier = spine.get_json("/api/v1/studies?from=2020-01-01&to=2020-12-31")
    assert not [s for s in earlier if s["study_instance_uid"] in refs]


def _bytes_before_pixels(path):
    """The file's bytes and where pydicom stops before its Pixel Data."""
    with open(path, "rb") as f:
        pydicom.dcmread(f, stop_before_pixels=True)
        end = f.tell()
        f.seek(0)
        return f.read(), end


def _meta_end(data):
    """Offset of the data set in Part 10 bytes: preamble, "DICM", then
    (0002,0000) UL whose value is the meta group's length (PS3.10 7.1)."""
    return 132 + 12 + struct.unpack_from("<I", data, 140)[0]


def test_header_retention(spine, tmp_path):
    # retention = header: a header copy per instance, kept in the database
    # with its row and written out by `mitilog header`, without pixel data
    # (reference: pydicom reads the copy as a DICOM file)
    problems = []
    with spine.db() as db:
        kept = db.execute("SELECT count(*) FROM instance_headers").fetchone()[0]
    assert kept == len({e["sop_instance_uid"] for e in spine.entries})
    for entry in spine.entries:
        uid = entry["sop_instance_uid"]
        path = str(tmp_path / ("%s.dcm" % entry["name"]))
        result = run([BINARY, "header", "--config", spine.config, "--output", path, uid])
        if result.returncode != 0:
            problems.append("no header copy for %s: %s" % (entry["name"], result.stderr))
            continue
        ds = pydicom.dcmread(path)
        if str(ds.SOPInstanceUID) != uid or str(ds.file_meta.MediaStorageSOPInstanceUID) != uid:
            problems.append("%s: copy of %s" % (entry["name"], ds.SOPInstanceUID))
        if "PixelData" in ds or (0x7FE0, 0x0010) in ds:
            problems.append("%s: header copy keeps PixelData" % entry["name"])
        original = pydicom.dcmread(entry["path"], stop_before_pixels=True)
        if str(ds.get("StudyDescription", "")) != str(original.get("StudyDescription", "")):
            problems.append("%s: study description differs" % entry["name"])
        # Not deflated: the copy's data set is the sent data set's bytes up
        # to where pydicom stops before the pixels (the meta header is the
        # receiver's own, written by DCMTK).
        if ds.file_meta.TransferSyntaxUID != pydicom.uid.DeflatedExplicitVRLittleEndian:
            sent, sent_end = _bytes_before_pixels(entry["path"])
            kept, kept_end = _bytes_before_pixels(path)
            if kept_end != len(kept) or kept[_meta_end(kept):] != sent[_meta_end(sent):sent_end]:
                problems.append("%s: copy is not the sent bytes before the pixels" % entry["name"])
    assert not problems, "\n".join(problems)
    missing = run([BINARY, "header", "--config", spine.config, "2.25.404"])
    assert missing.returncode == 1 and "no header copy" in missing.stderr


def test_resend_replaces(spine):
    entry = [e for e in spine.entries if e["name"] == "us_single_explicit"][0]
    result = spine.storescu([entry["path"]], calling="SENDER1",
                            options=entry["storescu_options"])
    assert result.returncode == 0, result.stderr
    rows = [r for r in instances_of_study(spine, entry["study_instance_uid"])
            if r["sop_instance_uid"] == entry["sop_instance_uid"]]
    assert len(rows) == 1  # one row per SOP Instance UID
    assert rows[0]["replaced_count"] == 1


def _dataset_bytes(path):
    """The data set of an explicit VR LE file, without preamble and meta."""
    ds = pydicom.dcmread(path)
    with open(path, "rb") as f:
        data = f.read()
    return data[132 + 12 + ds.file_meta.FileMetaInformationGroupLength:], ds


def test_bad_objects_over_the_network(spine, fixtures):
    good = [e for e in spine.entries if e["name"] == "us_value_forms"][0]
    body, ds = _dataset_bytes(good["path"])
    cases = {
        # parses, but has neither SOP Class nor SOP Instance UID:
        # (0010,0010) PN "FIXTURE^BAD " in explicit VR little endian
        "2.25.1001": (struct.pack("<HH", 0x0010, 0x0010) + b"PN"
                      + struct.pack("<H", 12) + b"FIXTURE^BAD "),
        # a data set cut inside an element's value
        "2.25.1002": body[:body.index(b"FIXTURE VALUES") + 4],
    }
    quarantine = os.path.join(spine.data_directory, "quarantine")
    before = set(os.listdir(quarantine)) if os.path.isdir(quarantine) else set()
    start = spine.mark()
    outcomes = {}
    for uid, data in cases.items():
        assoc = rawscu.Association("127.0.0.1", spine.dicom_port, AE_TITLE,
                                   "BADSENDER", str(ds.SOPClassUID))
        try:
            outcomes[uid] = assoc.c_store(uid, data)
            assoc.release()
        except rawscu.AssociationAborted as e:
            outcomes[uid] = "aborted: %s" % e
            assoc.close()
    time.sleep(0.5)
    spine.allow_errors_since(start)
    print("bad objects: %r" % outcomes)
    # reference: DICOM PS3.7 C.4.2.3 / interface: C000 "cannot understand"
    assert outcomes["2.25.1001"] == 0xC000, outcomes
    # a broken data set: C000, or the association is aborted (PS3.8 7.3)
    assert outcomes["2.25.1002"] == 0xC000 or str(outcomes["2.25.1002"]).startswith("aborted"), outcomes
    after = set(os.listdir(quarantine)) if os.path.isdir(quarantine) else set()
    assert len(after - before) >= 2, "quarantine: %s" % sorted(after)
    with spine.db() as db:
        rows = db.execute("SELECT sop_instance_uid, calling_ae_title, "
                          "quarantine_path, reason FROM rejections").fetchall()
    by_uid = {r[0]: r for r in rows}
    for uid in cases:
        assert uid in by_uid, rows
        assert by_uid[uid][1] == "BADSENDER"
        assert by_uid[uid][3], "rejection without a reason"
        kept = by_uid[uid][2]
        assert kept, "rejection of %s has no quarantine_path" % uid
        if not os.path.isabs(kept):
            kept = os.path.join(spine.data_directory, kept)
        assert os.path.isfile(kept), kept
        assert os.path.dirname(os.path.abspath(kept)) == os.path.abspath(quarantine)
    # the daemon is still up and nothing good was lost
    assert echoscu(spine.dicom_port).returncode == 0
    for study in {e["study_instance_uid"] for e in spine.entries}:
        uids = {r["sop_instance_uid"] for r in instances_of_study(spine, study)}
        assert {e["sop_instance_uid"] for e in spine.entries
                if e["study_instance_uid"] == study} <= uids
    status, health = spine.get("/healthz")
    assert health["rejections"] >= 2


def test_storescu_refuses_unparseable_files(spine, fixtures):
    # reference: DCMTK storescu parses each file before sending it; the
    # bad inputs never reach the daemon over the network this way.
    bad = [f["path"] for f in fixtures["manifest"] if f["group"] == "bad"]
    for path in bad:
        result = spine.storescu([path], calling="SENDER1")
        assert result.returncode != 0, path
        assert "missing SOP class (or instance) in file" in result.stderr, result.stderr


def test_database_after_shutdown(spine):
    spine.stop()
    if spine.engine == "sqlite":
        # reference: sqlite3 CLI, PRAGMA integrity_check answers "ok"
        result = run(["sqlite3", spine.database, "PRAGMA integrity_check"])
        assert result.stdout.strip() == "ok", result.stdout + result.stderr
        result = run(["sqlite3", spine.database, "PRAGMA user_version"])
        assert int(result.stdout.strip()) >= 1
    with spine.db() as db:
        count = db.execute("SELECT count(*) FROM instances").fetchone()[0]
    assert count == len(spine.entries)


# --------------------------------------------------------------------------
# Import from files
# --------------------------------------------------------------------------

def summary(line):
    """(imported, replaced, rejected) from the import summary line; any
    further ", <word(s)> N" counts (e.g. "not stored") must be 0."""
    m = re.match(r"^imported (\d+), replaced (\d+), rejected (\d+)((?:, [a-z ]+ \d+)*)$",
                 line)
    assert m, "not a summary line: %r" % line
    for extra in re.findall(r", ([a-z ]+) (\d+)", m.group(4)):
        assert extra[1] == "0", line
    return int(m.group(1)), int(m.group(2)), int(m.group(3))


def test_import_folder(daemon_factory, fixtures, tmp_path):
    folder = tmp_path / "incoming"
    folder.mkdir()
    for entry in fixtures["manifest"]:
        shutil.copy(entry["path"], folder / os.path.basename(entry["path"]))
    stored = stored_fixtures(fixtures)
    rejected = [f for f in fixtures["manifest"] if f["expect"] == "rejected"]
    daemon = daemon_factory("import")
    result = daemon.import_(str(folder))
    lines = result.stdout.strip().splitlines()
    # interface: last stdout line "imported N, replaced N, rejected N",
    # exit 1 when anything was rejected
    assert lines, result.stderr
    assert summary(lines[-1]) == (len(stored), 0, len(rejected)), \
        result.stdout + result.stderr
    assert result.returncode == 1, result.stderr
    for entry in rejected:
        assert entry["name"] in result.stderr, result.stderr
    with daemon.db() as db:
        rows = db.execute("SELECT source_path, reason FROM rejections").fetchall()
    assert sorted(os.path.basename(r[0]) for r in rows) == sorted(
        e["name"] for e in rejected)
    daemon.start()
    failures = []
    for entry in stored:
        ref = reference(entry["path"])  # reference: pydicom reads the same file
        rows = [r for r in instances_of_study(daemon, ref["study_instance_uid"])
                if r["sop_instance_uid"] == ref["sop_instance_uid"]]
        try:
            assert len(rows) == 1, "%s: %d rows" % (entry["name"], len(rows))
            assert_matches(rows[0], ref, "", entry["name"])
        except AssertionError as e:
            failures.append(str(e))
    assert not failures, "\n".join(failures)
    # importing a stored file again replaces it
    again = daemon.import_(str(folder / "us_single_explicit.dcm"))
    assert summary(again.stdout.strip().splitlines()[-1]) == (0, 1, 0), \
        again.stdout + again.stderr
    assert again.returncode == 0


def test_import_usage_errors(tmp_path):
    # interface: exit 2 on usage or configuration error
    result = run([BINARY, "import", "--config", str(tmp_path / "missing.ini"),
                  str(tmp_path)])
    assert result.returncode == 2, result.stdout + result.stderr
    result = run([BINARY, "import"])
    assert result.returncode == 2, result.stdout + result.stderr


def test_check_config(daemon_factory, tmp_path):
    # interface: check-config prints the effective configuration, exit 0;
    # a bad value is reported as "FILE:LINE: [section] key: reason", exit 2
    daemon = daemon_factory("check")
    result = run([BINARY, "check-config", daemon.config])
    assert result.returncode == 0, result.stderr
    assert "[dicom]" in result.stdout and str(daemon.dicom_port) in result.stdout
    bad = tmp_path / "bad.ini"
    bad.write_text("[dicom]\nae_title = MITILOG\nport = 99999999\n")
    result = run([BINARY, "check-config", str(bad)])
    assert result.returncode == 2, result.stdout + result.stderr
    assert re.search(r"%s:3: \[dicom\] port: \S" % re.escape(str(bad)),
                     result.stderr), result.stderr


# --------------------------------------------------------------------------
# Stopping while a sender is busy
# --------------------------------------------------------------------------

def test_sigterm_during_batch(daemon_factory, fixtures):
    daemon = daemon_factory("sigterm", storage=dict(retention="none"))
    daemon.start()
    entry = [e for e in fixtures["manifest"] if e["name"] == "us_single_explicit"][0]
    log_path = os.path.join(daemon.workdir, "storescu.log")
    with open(log_path, "w") as log:
        sender = subprocess.Popen(
            ["storescu", "-v", "-R", "-xe", "+II", "--repeat", "3000",
             "-aec", AE_TITLE, "-aet", "SENDER1", "127.0.0.1",
             str(daemon.dicom_port), entry["path"]],
            stdout=log, stderr=subprocess.STDOUT, env=dict(os.environ, TCP_NODELAY="1"))
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            with open(log_path) as f:
                if f.read().count("Received Store Response") >= 50:
                    break
            time.sleep(0.05)
        daemon.terminate()
        start = daemon.mark()
        rc = daemon.wait(timeout=120)
        try:
            sender.wait(timeout=120)
        finally:
            if sender.poll() is None:
                sender.kill()
    daemon.allow_errors_since(start)
    assert rc == 0, daemon.log()
    # pair each "SOPInstanceUID=" (printed before the request) with the
    # response that follows it (storescu -v output, DCMTK 3.6.7)
    succeeded = []
    current = None
    with open(log_path) as f:
        for line in f:
            m = re.search(r"SOPInstanceUID=(\S+)", line)
            if m:
                current = m.group(1)
            elif "Received Store Response (Success)" in line and current:
                succeeded.append(current)
                current = None
    assert len(succeeded) >= 50
    with daemon.db() as db:
        stored = {r[0] for r in db.execute("SELECT sop_instance_uid FROM instances")}
    missing = [u for u in succeeded if u not in stored]
    print("storescu acknowledged %d objects, database holds %d"
          % (len(succeeded), len(stored)))
    # interface: 0000 only after the commit, so nothing acknowledged
    # may be missing
    assert not missing, "%d acknowledged objects not in the DB" % len(missing)
