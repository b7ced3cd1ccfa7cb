"""Reading the indices drawn in the pixels, end to end: files rendered by
tests/fixtures/make_screens.py (the values drawn are the ground truth) are
sent over DICOM with DCMTK's storescu, as they are and compressed by
DCMTK's dcmcjpeg, dcmcrle and dcmcjpls (JPEG 2000 by Pillow's OpenJPEG);
a profile is learned with `mitilog device learn` from two other frames of
the same screen design; the HTTP API must show each value with its
provenance, and the durable queue must survive a kill -9.
"""

import glob
import json
import os
import signal
import sqlite3
import sys
import time

import pydicom
import pytest

from conftest import BINARY, REPO, run

sys.path.insert(0, os.path.join(REPO, "tests", "fixtures"))
import make_screens  # noqa: E402

PROFILE_KEY = "kestrel-320"

# storescu proposals that send each file as it is (storescu --help, DCMTK 3.6.7)
COMPRESSED = {
    "jpeg_baseline": (["dcmcjpeg", "+eb"], ["-xy"]),
    "rle": (["dcmcrle"], ["-xr"]),
    "jpegls": (["dcmcjpls", "+el"], ["-xt"]),
    "jpeg2000": (None, ["-xv"]),
}


def write_screen(folder, name, device, drawn, header=None, frames=1):
    path = os.path.join(folder, name + ".dcm")
    make_screens.write(make_screens.make_screen(name, device, drawn, header, frames), path)
    return path


def learn_profile(daemon, folder):
    """`mitilog device learn` from the two learning frames (decoded by
    `mitilog frame`), then activate: what an administrator does."""
    os.makedirs(daemon.data_directory, exist_ok=True)
    command = [BINARY, "device", "learn", "--config", daemon.config, "--key", PROFILE_KEY]
    frames = []
    for name, values in make_screens.LEARNING.items():
        dicom = write_screen(folder, name, "pixels_only", values)
        pgm = os.path.join(folder, name + ".pgm")
        result = run([BINARY, "frame", "--output", pgm, dicom])
        assert result.returncode == 0, result.stderr
        command += ["--value", "%s:%s" % (pgm, ",".join(
            "%s=%s" % (key.upper(), value) for key, value in values.items()))]
        frames.append(pgm)
    result = run(command + frames)
    assert result.returncode == 0, result.stdout + result.stderr
    result = run([BINARY, "device", "activate", "--config", daemon.config, PROFILE_KEY])
    assert result.returncode == 0, result.stderr


def add_reading_section(daemon, **keys):
    with open(daemon.config, "a") as f:
        f.write("[reading]\n")
        for key, value in keys.items():
            f.write("%s = %s\n" % (key, value))


def wait_until_read(daemon, expected, timeout=120):
    """Waits (not a timed assertion: the bound only stops a hung run) until
    expected readings exist and none is still queued."""
    deadline = time.monotonic() + timeout
    while True:
        with daemon.db() as db:
            done = db.execute("SELECT count(*) FROM screen_readings WHERE state <> 'queued'"
                              ).fetchone()[0]
            queued = db.execute("SELECT count(*) FROM reading_queue").fetchone()[0]
        if done >= expected and queued == 0:
            return
        assert time.monotonic() < deadline, "readings not written: %d done, %d queued\n%s" % (
            done, queued, daemon.log())
        time.sleep(0.2)


def wait_for_exam(daemon, study_uid, timeout=120):
    """Waits (not a timed assertion) until the exam record was rebuilt
    after the last reading of the study was written."""
    deadline = time.monotonic() + timeout
    while True:
        with daemon.db() as db:
            row = db.execute(
                "SELECT (SELECT updated_at FROM exams WHERE study_instance_uid = ?1) >= "
                "(SELECT max(r.updated_at) FROM screen_readings r JOIN instances i "
                " ON i.id = r.instance_id WHERE i.study_instance_uid = ?1)",
                (study_uid,)).fetchone()
        if row[0] == 1:
            return
        assert time.monotonic() < deadline, daemon.log()
        time.sleep(0.2)


def study_when(daemon, study_uid, predicate, timeout=120):
    """The study's JSON once predicate holds for it: the exam is rebuilt
    on the exam worker after the readings (a wait, not a timed assertion;
    the assertion that follows says what was expected)."""
    deadline = time.monotonic() + timeout
    while True:
        study = daemon.get_json("/api/v1/studies/%s" % study_uid)
        if predicate(study) or time.monotonic() > deadline:
            return study
        time.sleep(0.2)


def instances_by_uid(daemon, study_uid):
    study = daemon.get_json("/api/v1/studies/%s" % study_uid)
    return study, {i["sop_instance_uid"]: i for i in study["instances"]}


@pytest.fixture(scope="module")
def sent(tmp_path_factory, module_daemon_factory):
    """One daemon that learned the profile and received every screen file."""
    folder = str(tmp_path_factory.mktemp("screens"))
    daemon = module_daemon_factory("reading")
    learn_profile(daemon, folder)
    daemon.start()
    files = {}
    for name, (device, drawn, header, frames, colour) in make_screens.SCREENS.items():
        files[name] = (write_screen(folder, name, device, drawn, header, frames), drawn, header)
    result = daemon.storescu([path for path, _, _ in files.values()], options=["-xe"])
    assert result.returncode == 0, result.stderr
    # compressed copies of a pixels-only screen, each its own instance
    drawn = dict(mi="1.4", tis="0.6", tib="2.0")
    for syntax, (command, proposal) in COMPRESSED.items():
        native = write_screen(folder, "native_for_" + syntax, "pixels_only", drawn)
        path = os.path.join(folder, syntax + ".dcm")
        if command is None:
            make_screens.write_jpeg2000(native, path)
        else:
            result = run(command + [native, path])
            assert result.returncode == 0, result.stderr
        result = daemon.storescu([path], options=proposal)
        assert result.returncode == 0, result.stderr
        files[syntax] = (path, drawn, None)
    wait_until_read(daemon, len(files))
    study_uid = str(pydicom.dcmread(files["pixels_only_1"][0]).StudyInstanceUID)
    wait_for_exam(daemon, study_uid)
    return dict(daemon=daemon, files=files, study_uid=study_uid, folder=folder)


def uid_of(path):
    return str(pydicom.dcmread(path, stop_before_pixels=True).SOPInstanceUID)


def test_pixels_only_device_values_come_from_the_screen(sent):
    """The values drawn (the fixture's ground truth) are what the API shows,
    with source 'pixels' and the profile that read them."""
    study, by_uid = instances_by_uid(sent["daemon"], sent["study_uid"])
    for name in ("pixels_only_1", "pixels_only_2", "pixels_only_cine"):
        path, drawn, _ = sent["files"][name]
        instance = by_uid[uid_of(path)]
        assert instance["screen_reading"]["state"] == "read"
        assert instance["screen_reading"]["profile_key"] == PROFILE_KEY
        for key, text in drawn.items():
            index = instance["indices"][key]
            assert index["value"] == float(text), (name, key, index)
            assert index["source"] == "pixels"
            assert index["used"] == "screen"
            assert index["header"]["status"] == "missing"
            assert index["screen"]["text"] == text
        # the header has none of them: still "missing" at the top level
        assert instance["mi"] is None


def test_cine_is_read_on_several_frames(sent):
    """A 4-frame cine is read on 3 frames ([reading] cine_frames default)."""
    _, by_uid = instances_by_uid(sent["daemon"], sent["study_uid"])
    path, _, _ = sent["files"]["pixels_only_cine"]
    assert by_uid[uid_of(path)]["screen_reading"]["frames_read"] == 3


def test_header_and_pixels_agree_within_the_screen_rounding(sent):
    """Header 0.72 and a screen drawing 0.7 with one decimal agree: a
    display rounds to its digits (half a unit of the last decimal drawn;
    common practice, no source)."""
    _, by_uid = instances_by_uid(sent["daemon"], sent["study_uid"])
    for name in ("both_1", "both_2"):
        path, drawn, header = sent["files"][name]
        instance = by_uid[uid_of(path)]
        for key in drawn:
            index = instance["indices"][key]
            assert index["source"] == "both"
            assert index["agree"] is True
            assert index["header"]["value"] == float(header[key])
            assert index["screen"]["value"] == float(drawn[key])
            # policy index_source default: the screen's value is used
            assert index["used"] == "screen"
            assert index["value"] == float(drawn[key])


def test_disagreeing_device_is_a_finding(sent):
    """Header MI 1.0 but the screen showed 1.3: agree false, and a
    header_screen_mismatch finding names the capture (docs/policy.md)."""
    daemon = sent["daemon"]
    path, drawn, header = sent["files"]["disagreeing_1"]
    uid = uid_of(path)
    _, by_uid = instances_by_uid(daemon, sent["study_uid"])
    study = study_when(daemon, sent["study_uid"], lambda s: any(
        f["rule_id"] == "header_screen_mismatch" for f in s["findings"]))
    mi = by_uid[uid]["indices"]["mi"]
    assert mi["agree"] is False and mi["source"] == "both"
    assert by_uid[uid]["indices"]["tis"]["agree"] is True
    mismatches = [f for f in study["findings"] if f["rule_id"] == "header_screen_mismatch"]
    assert [f["instance_uids"] for f in mismatches] == [[uid]]
    assert mismatches[0]["quantity"] == "mi"
    assert mismatches[0]["measured_value"] == 1.3
    assert PROFILE_KEY in mismatches[0]["source"]
    by_device = daemon.get_json("/api/v1/ingest")["reading"]["header_screen_mismatch_by_device"]
    assert by_device == [dict(profile_key=PROFILE_KEY, station_names=["LARK-3"], captures=1,
                              findings=1)]


def test_timeline_carries_the_provenance(sent):
    study = study_when(sent["daemon"], sent["study_uid"],
                       lambda s: len(s["timeline"]) >= len(sent["files"]))
    sources = {entry["sop_instance_uid"]: entry["indices"]["mi"]["source"]
               for entry in study["timeline"]}
    assert sources[uid_of(sent["files"]["pixels_only_1"][0])] == "pixels"
    assert sources[uid_of(sent["files"]["both_1"][0])] == "both"


@pytest.mark.parametrize("syntax", sorted(COMPRESSED))
def test_compressed_files_are_read(sent, syntax):
    """JPEG baseline, RLE, JPEG-LS and JPEG 2000 copies of a screen, made by
    DCMTK's own compressors (PS3.5 section 8.2), read to the values drawn."""
    path, drawn, _ = sent["files"][syntax]
    _, by_uid = instances_by_uid(sent["daemon"], sent["study_uid"])
    instance = by_uid[uid_of(path)]
    assert instance["transfer_syntax_uid"] == str(
        pydicom.dcmread(path, stop_before_pixels=True).file_meta.TransferSyntaxUID)
    assert instance["screen_reading"]["state"] == "read", instance["screen_reading"]
    for key, text in drawn.items():
        assert instance["indices"][key]["value"] == float(text)
        assert instance["indices"][key]["source"] == "pixels"


def test_exam_maxima_use_the_screen_values(sent):
    """The exam record is rebuilt after reading: its MI maximum is the
    highest value drawn in the study (the disagreeing device's 1.4 drawn
    by the compressed copies; the screen wins by default)."""
    drawn = [float(d["mi"]) for _, d, _ in sent["files"].values()]
    study = study_when(sent["daemon"], sent["study_uid"],
                       lambda s: s["maxima"]["mi"] == max(drawn))
    assert study["maxima"]["mi"] == max(drawn)


def test_frame_that_does_not_decode_is_not_read_with_a_reason(sent, tmp_path):
    """A JPEG-LS screen whose frame is cut short: acknowledged and stored,
    its pixel values "not read" with the reason, never a number, and the
    daemon keeps running (common practice, no source)."""
    daemon = sent["daemon"]
    native = write_screen(str(tmp_path), "damaged_source", "pixels_only",
                          dict(mi="1.1", tis="0.2", tib="0.3"))
    compressed = str(tmp_path / "damaged_jls.dcm")
    assert run(["dcmcjpls", "+el", native, compressed]).returncode == 0
    ds = pydicom.dcmread(compressed)
    from pydicom.encaps import encapsulate, generate_pixel_data_frame
    frame = next(generate_pixel_data_frame(ds.PixelData, 1))
    ds.PixelData = encapsulate([frame[:len(frame) // 4]])
    ds.save_as(compressed, write_like_original=False)
    result = daemon.storescu([compressed], options=["-xt"])
    assert result.returncode == 0, result.stderr
    wait_until_read(daemon, len(sent["files"]) + 1)
    _, by_uid = instances_by_uid(daemon, sent["study_uid"])
    instance = by_uid[str(ds.SOPInstanceUID)]
    assert instance["screen_reading"]["state"] == "not_read"
    assert "does not decode" in instance["screen_reading"]["reason"]
    for key in ("mi", "tis", "tib"):
        assert instance["indices"][key]["value"] is None
        assert instance["indices"][key]["source"] is None
    assert daemon.process.poll() is None


def spool_files(daemon):
    return sorted(glob.glob(os.path.join(daemon.data_directory, "reading", "*")))


def test_kill_while_queued_loses_nothing_and_reads_after_restart(daemon_factory, tmp_path):
    """Objects acknowledged while the queue holds them (workers = 0 keeps
    them there) survive kill -9: their queue rows and spool copies are on
    disk, and after a restart with a worker every one is read to the values
    drawn; the spool empties (common practice, no source)."""
    daemon = daemon_factory("killed")
    learn_profile(daemon, str(tmp_path))
    add_reading_section(daemon, workers=0)
    daemon.start()
    values = [dict(mi="%d.%d" % (1 + i % 2, i), tis="0.%d" % (i + 1), tib="1.%d" % i)
              for i in range(5)]
    paths = [write_screen(str(tmp_path), "queued_%d" % i, "pixels_only", v)
             for i, v in enumerate(values)]
    result = daemon.storescu(paths, options=["-xe"])
    assert result.returncode == 0, result.stderr      # all acknowledged
    with daemon.db() as db:
        assert db.execute("SELECT count(*) FROM reading_queue").fetchone()[0] == 5
    assert len(spool_files(daemon)) == 5
    daemon.process.send_signal(signal.SIGKILL)
    daemon.process.wait(timeout=30)
    daemon.process = None
    with open(daemon.config) as f:
        text = f.read().replace("workers = 0", "workers = 1")
    with open(daemon.config, "w") as f:
        f.write(text)
    daemon.start()
    wait_until_read(daemon, 5)
    with daemon.db() as db:
        rows = {uid: {"mi": mi, "tis": tis, "tib": tib} for uid, mi, tis, tib in db.execute(
            "SELECT i.sop_instance_uid, r.mi, r.tis, r.tib "
            "FROM screen_readings r JOIN instances i ON i.id = r.instance_id "
            "WHERE r.state = 'read'").fetchall()}
    for path, drawn in zip(paths, values):
        assert rows[uid_of(path)] == {k: float(v) for k, v in drawn.items()}
    assert spool_files(daemon) == []


def test_full_queue_stores_the_object_not_read_and_rescore_reads_it(daemon_factory, tmp_path):
    """A queue bounded at 2 objects: the 3rd and 4th are acknowledged and
    stored at once with "not read: reading queue full" (never blocked,
    never dropped); with retention full, `mitilog rescore --read-pixels`
    reads them later (docs/reading.md)."""
    daemon = daemon_factory("full", storage=dict(retention="full"))
    learn_profile(daemon, str(tmp_path))
    add_reading_section(daemon, workers=0, queue_objects=2)
    daemon.start()
    drawn = dict(mi="0.9", tis="0.4", tib="1.2")
    paths = [write_screen(str(tmp_path), "full_%d" % i, "pixels_only", drawn) for i in range(4)]
    result = daemon.storescu(paths, options=["-xe"])
    assert result.returncode == 0, result.stderr
    with daemon.db() as db:
        states = db.execute("SELECT state, reason FROM screen_readings ORDER BY instance_id"
                            ).fetchall()
    assert [s for s, _ in states] == ["queued", "queued", "not_read", "not_read"]
    assert all("reading queue full" in reason for _, reason in states[2:])
    reading = daemon.get_json("/api/v1/ingest")["reading"]
    assert (reading["queued"], reading["not_read_queue_full"], reading["read"]) == (2, 2, 0)
    # the images read from nothing yet are "without indices" for now
    assert daemon.get_json("/api/v1/ingest")["objects_per_hour"][0]["without_indices"] == 4
    daemon.stop()
    with open(daemon.config) as f:
        text = f.read().replace("workers = 0", "workers = 1")
    with open(daemon.config, "w") as f:
        f.write(text)
    result = run([BINARY, "rescore", "--config", daemon.config, "--read-pixels"])
    assert result.returncode == 0, result.stderr
    assert "4 captures read again" in result.stdout, result.stdout
    with daemon.db() as db:
        rows = db.execute("SELECT state, mi, tis, tib FROM screen_readings").fetchall()
    assert rows == [("read", 0.9, 0.4, 1.2)] * 4
    daemon.returncode = None
    daemon.start()
    status = daemon.get_json("/api/v1/ingest")
    assert status["reading"]["read"] == 4
    assert status["objects_per_hour"][0]["without_indices"] == 0


def test_import_reads_the_pixels_before_it_reports(daemon_factory, tmp_path):
    """`mitilog import` reads the pixels of the imported files and returns
    once they are read (docs/reading.md, backfill)."""
    daemon = daemon_factory("imported")
    learn_profile(daemon, str(tmp_path))
    folder = tmp_path / "import"
    folder.mkdir()
    drawn = dict(mi="1.5", tis="0.7", tib="2.1")
    write_screen(str(folder), "imported_1", "pixels_only", drawn)
    result = daemon.import_(str(folder))
    assert result.returncode == 0, result.stderr
    with daemon.db() as db:
        rows = db.execute("SELECT state, mi, tis, tib FROM screen_readings").fetchall()
        queued = db.execute("SELECT count(*) FROM reading_queue").fetchone()[0]
    assert rows == [("read", 1.5, 0.7, 2.1)]
    assert queued == 0


def test_cine_whose_frames_disagree_is_not_read(sent, tmp_path):
    """A cine whose last frame shows another MI: MI is "not read" with a
    reason (the frames read disagree), never one of the two numbers; the
    indices on which the frames agree are read (common practice, no
    source)."""
    daemon = sent["daemon"]
    same = dict(tis="0.3", tib="1.2")
    frames = [dict(mi="0.9", **same)] * 3 + [dict(mi="1.1", **same)]
    path = str(tmp_path / "changing_cine.dcm")
    make_screens.write(make_screens.make_screen("changing_cine", "pixels_only", frames[0],
                                                frames=4, frame_values=frames), path)
    result = daemon.storescu([path], options=["-xe"])
    assert result.returncode == 0, result.stderr
    uid = uid_of(path)
    deadline = time.monotonic() + 120
    while True:
        _, by_uid = instances_by_uid(daemon, sent["study_uid"])
        reading = by_uid[uid]["screen_reading"]
        if reading["state"] != "queued" or time.monotonic() > deadline:
            break
        time.sleep(0.2)
    indices = by_uid[uid]["indices"]
    assert indices["mi"]["value"] is None
    assert indices["mi"]["screen"]["status"] == "not_read"
    assert indices["mi"]["screen"]["reason"]
    assert indices["tis"]["value"] == 0.3 and indices["tib"]["value"] == 1.2


def test_object_resent_while_queued_is_read_as_last_received(daemon_factory, tmp_path):
    """An object re-sent before it was read is read once, as last received:
    what is kept belongs to the latest receipt, and the older spool copy
    goes (common practice, no source)."""
    daemon = daemon_factory("resent")
    learn_profile(daemon, str(tmp_path))
    add_reading_section(daemon, workers=0)
    daemon.start()
    first = write_screen(str(tmp_path), "resent", "pixels_only", dict(mi="0.5", tis="0.1",
                                                                     tib="0.2"))
    assert daemon.storescu([first], options=["-xe"]).returncode == 0
    os.makedirs(str(tmp_path / "second"))
    second = write_screen(str(tmp_path / "second"), "resent", "pixels_only",
                          dict(mi="1.7", tis="0.9", tib="2.4"))
    assert uid_of(first) == uid_of(second)
    assert daemon.storescu([second], options=["-xe"]).returncode == 0
    assert len(spool_files(daemon)) == 1
    daemon.stop()
    with open(daemon.config) as f:
        text = f.read().replace("workers = 0", "workers = 1")
    with open(daemon.config, "w") as f:
        f.write(text)
    daemon.returncode = None
    daemon.start()
    wait_until_read(daemon, 1)
    with daemon.db() as db:
        rows = db.execute("SELECT state, mi, tis, tib FROM screen_readings").fetchall()
    assert rows == [("read", 1.7, 0.9, 2.4)]
    assert spool_files(daemon) == []
