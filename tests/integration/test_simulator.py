"""Black-box tests of `mitilog simulate` (src/sim).

Run with /usr/bin/python3 -m pytest tests/integration/test_simulator.py
(Debian's python3 has pydicom). The binary is $MITILOG_BINARY or
build/mitilog. Files are read with pydicom, never with mitilog.
"""
import collections
import csv
import glob
import hashlib
import os
import re
import shutil
import statistics
import subprocess

import pydicom
import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BINARY = os.environ.get("MITILOG_BINARY", os.path.join(ROOT, "build", "mitilog"))

# Documented per-mode medians: docs/demo.md ("Index model") is the source;
# keep the two in sync. mode: ((MI low, MI high), (TI low, TI high)), TI =
# the governing index present (TIC, else TIB, else TIS).
MODE_MEDIAN_RANGES = {
    "b": ((0.9, 1.2), (0.2, 0.4)),
    "m": ((0.8, 1.2), (0.5, 0.9)),
    "colour": ((0.6, 0.9), (0.4, 0.7)),
    "pw": ((0.4, 0.7), (0.7, 1.3)),
    "cw": ((0.3, 0.5), (1.0, 1.6)),
    "3d": ((0.8, 1.0), (0.3, 0.5)),
}
# Documented exam mix over a week (docs/demo.md, "Exam mix"): fraction of
# studies by Study Description group.
MIX_RANGES = {
    "obstetric": (("US OBSTETRIC EARLY PREGNANCY", "US OBSTETRIC 2ND TRIMESTER",
                   "US OBSTETRIC 3RD TRIMESTER"), (0.20, 0.38)),
    "abdomen": (("US ABDOMEN", "US RENAL TRACT", "US PAEDIATRIC ABDOMEN"), (0.20, 0.38)),
    "echo": (("ECHO ADULT TTE", "ECHO PAEDIATRIC TTE"), (0.04, 0.14)),
    "vascular": (("US CAROTID DOPPLER", "US VENOUS LEG DOPPLER",
                  "US TRANSCRANIAL DOPPLER"), (0.08, 0.22)),
}
WEEK_STUDIES = (5 * 55 + 2 * 25, 5 * 95 + 2 * 55)   # SIM_WEEKDAY/WEEKEND_EXAMS_*

US_IMAGE = "1.2.840.10008.5.1.4.1.1.6.1"
US_MULTIFRAME = "1.2.840.10008.5.1.4.1.1.3.1"
COMPREHENSIVE_SR = "1.2.840.10008.5.1.4.1.1.88.33"


def mode_of(bitmap):
    """Image Type value 4 bitmap (DICOM PS3.3 C.8.5.6.1.1): 0001 2D,
    0002 M-mode, 0004 CW Doppler, 0008 PW Doppler, 0010 Colour Doppler,
    0020 Colour M-mode, 0040 3D rendering, 0100 Colour Power Mode; the
    strongest emitter present names the mode."""
    if bitmap & 0x0004:
        return "cw"
    if bitmap & 0x0008:
        return "pw"
    if bitmap & (0x0010 | 0x0020 | 0x0100):
        return "colour"
    if bitmap & 0x0002:
        return "m"
    if bitmap & 0x0040:
        return "3d"
    return "b"


def simulate(out, days, seed):
    if not os.access(BINARY, os.X_OK):
        pytest.skip("no mitilog binary at %s (set MITILOG_BINARY)" % BINARY)
    subprocess.run([BINARY, "simulate", "--out", str(out), "--days", str(days),
                    "--seed", str(seed)], check=True, capture_output=True)


def digests(directory):
    result = {}
    for path in sorted(glob.glob(os.path.join(str(directory), "**", "*"), recursive=True)):
        if os.path.isfile(path):
            with open(path, "rb") as f:
                result[os.path.relpath(path, str(directory))] = hashlib.sha256(f.read()).hexdigest()
    return result


@pytest.fixture(scope="module")
def week(tmp_path_factory):
    out = tmp_path_factory.mktemp("week")
    simulate(out, 7, 1)
    return out


def test_same_seed_identical_files(tmp_path):
    simulate(tmp_path / "a", 1, 5)
    simulate(tmp_path / "b", 1, 5)
    simulate(tmp_path / "c", 1, 6)
    a, b, c = digests(tmp_path / "a"), digests(tmp_path / "b"), digests(tmp_path / "c")
    assert len(a) > 100
    assert a == b
    assert a != c


def test_site_renames_rooms_only(tmp_path):
    """--site 1 is the default; --site 2 names the same rooms "-2" (Station
    Name, serial, manifest room) and changes nothing else of a file."""
    if not os.access(BINARY, os.X_OK):
        pytest.skip("no mitilog binary at %s (set MITILOG_BINARY)" % BINARY)
    for name, site in (("one", "1"), ("two", "2")):
        subprocess.run([BINARY, "simulate", "--out", str(tmp_path / name), "--days", "1",
                        "--seed", "5", "--site", site], check=True, capture_output=True)
    simulate(tmp_path / "default", 1, 5)
    assert digests(tmp_path / "one") == digests(tmp_path / "default")
    with open(tmp_path / "two" / "manifest.csv") as f:
        rooms = {line.split(",")[5] for line in f.read().splitlines()[1:]}
    assert rooms and all(room.endswith("-2") for room in rooms), rooms
    first = sorted(glob.glob(str(tmp_path / "one" / "*" / "e001" / "001.dcm")))[0]
    second = first.replace(str(tmp_path / "one"), str(tmp_path / "two"))
    a, b = pydicom.dcmread(first), pydicom.dcmread(second)
    assert b.StationName == a.StationName + "-2"
    assert b.DeviceSerialNumber == a.DeviceSerialNumber + "-2"
    for element in a:
        if element.tag not in (0x00081010, 0x00181000):
            assert b[element.tag] == element, element.tag
    run = subprocess.run([BINARY, "simulate", "--out", str(tmp_path / "bad"), "--site", "10"],
                         capture_output=True)
    assert run.returncode == 2


def test_matrix_sets_the_pixel_matrix(tmp_path):
    """--matrix 64x48: single frames 64 x 48, cine frames 32 x 24, and as
    many pixel bytes as the matrix, frames and samples say (reference:
    pydicom's reading of Rows, Columns, Number of Frames and Pixel Data)."""
    if not os.access(BINARY, os.X_OK):
        pytest.skip("no mitilog binary at %s (set MITILOG_BINARY)" % BINARY)
    subprocess.run([BINARY, "simulate", "--out", str(tmp_path / "m"), "--days", "1",
                    "--seed", "5", "--matrix", "64x48"], check=True, capture_output=True)
    kinds = set()
    for path in glob.glob(str(tmp_path / "m" / "*" / "*" / "*.dcm")):
        ds = pydicom.dcmread(path)
        if "PixelData" not in ds:
            continue
        frames = int(ds.get("NumberOfFrames", 1) or 1)
        expected = (32, 24) if "NumberOfFrames" in ds else (64, 48)
        assert (ds.Columns, ds.Rows) == expected, path
        assert len(ds.PixelData) == ds.Columns * ds.Rows * frames * ds.SamplesPerPixel
        kinds.add("NumberOfFrames" in ds)
    assert kinds == {True, False}
    for bad in ("64", "1x1", "64x48x2", "4096x2"):
        run = subprocess.run([BINARY, "simulate", "--out", str(tmp_path / "bad"),
                              "--matrix", bad], capture_output=True)
        assert run.returncode == 2, bad


def test_meta_header_is_deterministic(week):
    path = sorted(glob.glob(os.path.join(str(week), "*", "*", "001.dcm")))[0]
    ds = pydicom.dcmread(path)
    assert ds.file_meta.MediaStorageSOPInstanceUID == ds.SOPInstanceUID
    assert ds.SOPInstanceUID.startswith("2.25.")
    assert ds.InstanceCreationDate == ds.AcquisitionDateTime[:8]


def test_distributions_match_documented_ranges(week):
    values = collections.defaultdict(lambda: ([], []))
    studies = {}
    for path in glob.glob(os.path.join(str(week), "*", "*", "*.dcm")):
        ds = pydicom.dcmread(path, stop_before_pixels=True)
        studies[ds.StudyInstanceUID] = ds.StudyDescription
        if ds.Modality != "US" or "MechanicalIndex" not in ds:
            continue
        mode = mode_of(int(ds.ImageType[3], 16))
        ti = (ds.get("CranialThermalIndex") or ds.get("BoneThermalIndex")
              or ds.get("SoftTissueThermalIndex"))
        values[mode][0].append(float(ds.MechanicalIndex))
        values[mode][1].append(float(ti))
    assert set(values) == set(MODE_MEDIAN_RANGES)
    for mode, ((mi_lo, mi_hi), (ti_lo, ti_hi)) in MODE_MEDIAN_RANGES.items():
        mi = statistics.median(values[mode][0])
        ti = statistics.median(values[mode][1])
        assert mi_lo <= mi <= mi_hi, (mode, "MI", mi)
        assert ti_lo <= ti <= ti_hi, (mode, "TI", ti)
    # Doppler heats more than B-mode; B-mode has the highest MI.
    assert statistics.median(values["pw"][1]) > statistics.median(values["colour"][1]) \
        > statistics.median(values["b"][1])
    assert statistics.median(values["b"][0]) > statistics.median(values["pw"][0])

    assert WEEK_STUDIES[0] <= len(studies) <= WEEK_STUDIES[1]
    mix = collections.Counter(studies.values())
    for name, (descriptions, (low, high)) in MIX_RANGES.items():
        share = sum(mix[d] for d in descriptions) / len(studies)
        assert low <= share <= high, (name, share)


def test_manifest_records_planted_problems(week):
    with open(os.path.join(str(week), "manifest.csv")) as f:
        header = f.readline().strip().split(",")
        rows = [dict(zip(header, line.rstrip("\n").split(","))) for line in f]
    assert header == ["path", "sop_instance_uid", "study_instance_uid", "exam_type",
                      "preset", "room", "planted", "device", "software_versions",
                      "matrix", "transfer_syntax", "header_indices",
                      "mi_text", "mi_box", "tis_text", "tis_box",
                      "tib_text", "tib_box", "tic_text", "tic_box"]
    tags = collections.Counter(t for r in rows for t in r["planted"].split(";") if t)
    assert tags["mi-over-limit"] > 0          # day 5 (index 4) is in week 1
    assert tags["resend"] > 0
    resent = {r["sop_instance_uid"] for r in rows if "resend" in r["planted"]}
    originals = [r for r in rows if r["sop_instance_uid"] in resent and "resend" not in r["planted"]]
    assert len(originals) == len(resent)      # same UIDs appear twice
    for r in rows[:50]:
        assert os.path.isfile(os.path.join(str(week), r["path"]))


def sample_of_each_kind(directory):
    kinds = {}
    for path in sorted(glob.glob(os.path.join(str(directory), "*", "*", "*.dcm"))):
        ds = pydicom.dcmread(path, stop_before_pixels=True)
        key = (ds.SOPClassUID, ds.get("PhotometricInterpretation", ""),
               ds.ImageType[3] if "ImageType" in ds else "")
        kinds.setdefault(key, path)
    return kinds


def dciodvfy_sample(directory):
    """One file of every kind (SOP class, photometric interpretation, mode
    bitmap) and one of every kind for each exam type, room and device
    (software version included), chosen through the manifest."""
    with open(os.path.join(str(directory), "manifest.csv")) as f:
        rows = list(csv.DictReader(f))
    chosen = {}
    for key, path in sample_of_each_kind(directory).items():
        chosen[path] = key
    by_type = {}
    for row in rows:
        path = os.path.join(str(directory), row["path"])
        ds = pydicom.dcmread(path, stop_before_pixels=True)
        key = (ds.SOPClassUID, row["exam_type"], row["room"], row["device"])
        by_type.setdefault(key, path)
    for key, path in by_type.items():
        chosen.setdefault(path, key)
    return chosen, {row["exam_type"] for row in rows}, {row["room"] for row in rows}


def dciodvfy_errors(path):
    run = subprocess.run(["dciodvfy", path], capture_output=True, text=True)
    return [l for l in (run.stdout + run.stderr).splitlines() if l.startswith("Error")]


def test_dciodvfy_reports_no_errors(week):
    """Reference: dicom3tools' dciodvfy checks each file against its IOD
    (PS3.3); every kind, every exam type, every room's device. Paired
    organs (kidney, testis, shoulder, leg) need Laterality (0020,0060),
    Type 2C in General Series (PS3.3 C.7.3.1)."""
    if shutil.which("dciodvfy") is None:
        pytest.skip("dciodvfy not installed")
    sample, exam_types, rooms = dciodvfy_sample(week)
    classes = {key[0] for key in sample.values()}
    assert {US_IMAGE, US_MULTIFRAME, COMPREHENSIVE_SR} <= classes
    assert {key[1] for key in sample.values() if len(key) == 4} == exam_types
    assert len(exam_types) == 16 and len(rooms) == 5
    for path, key in sorted(sample.items()):
        assert dciodvfy_errors(path) == [], (key, path)
    paired = [p for p, key in sample.items()
              if key[1] in ("renal", "small_parts", "msk", "venous_leg")]
    assert paired
    for path in paired:
        ds = pydicom.dcmread(path, stop_before_pixels=True)
        if ds.Modality == "US":
            assert ds.Laterality in ("R", "L"), path


def test_pydicom_reads_every_kind(week):
    for (sop_class, _, _), path in sample_of_each_kind(week).items():
        ds = pydicom.dcmread(path)
        if sop_class == COMPREHENSIVE_SR:
            codes = {(i.ConceptNameCodeSequence[0].CodingSchemeDesignator,
                      i.ConceptNameCodeSequence[0].CodeValue) for i in ds.ContentSequence}
            assert ("99MTSIM", "AO-SCANTIME") in codes
            continue
        pixels = ds.pixel_array
        frames = int(ds.get("NumberOfFrames", 1))
        expected = (((frames,) if frames > 1 else ()) + (ds.Rows, ds.Columns)
                    + ((3,) if ds.SamplesPerPixel == 3 else ()))
        assert pixels.shape == expected
        assert len(ds.SequenceOfUltrasoundRegions) >= 1
        if frames > 1:
            assert ds.FrameIncrementPointer == 0x00181063


def test_bad_arguments_exit_2(tmp_path):
    if not os.access(BINARY, os.X_OK):
        pytest.skip("no mitilog binary")
    for args in (["--days", "0", "--out", str(tmp_path)], ["--bogus"],
                 ["--out", str(tmp_path), "--start", "2026-13-01"], [],
                 ["--send", "nohostport"]):
        run = subprocess.run([BINARY, "simulate"] + args, capture_output=True)
        assert run.returncode == 2, args
    run = subprocess.run([BINARY, "simulate", "--help"], capture_output=True, text=True)
    assert run.returncode == 0 and "--seed" in run.stdout


def test_send_to_storescp(tmp_path):
    """--send streams every study (the resend twice) with storescu."""
    if shutil.which("storescp") is None or not os.access(BINARY, os.X_OK):
        pytest.skip("storescp or mitilog missing")
    import socket
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    received = tmp_path / "received"
    received.mkdir()
    env = dict(os.environ, TCP_NODELAY="1")   # bench/README.md: Nagle
    scp = subprocess.Popen(["storescp", "-od", str(received), "-uf", "--accept-all", str(port)], env=env,
                           stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        import time
        time.sleep(0.5)
        run = subprocess.run([BINARY, "simulate", "--days", "1", "--seed", "3",
                              "--out", str(tmp_path / "out"), "--send", "127.0.0.1:%d" % port,
                              "--called-aet", "ANY-SCP", "--speed", "0"],
                             capture_output=True, text=True, timeout=300)
    finally:
        scp.terminate()
        scp.wait()
    assert run.returncode == 0, run.stderr
    summary = [l for l in run.stdout.splitlines() if l.startswith("summary:")][0]
    assert " 0 failed" in summary
    with open(tmp_path / "out" / "manifest.csv") as f:
        lines = f.read().splitlines()[1:]
    assert "%d object(s) sent" % len(lines) in summary
    assert len(os.listdir(received)) == len({l.split(",")[1] for l in lines})
    # A dead port fails with a non-zero exit.
    run = subprocess.run([BINARY, "simulate", "--days", "1", "--seed", "3",
                          "--out", str(tmp_path / "out2"), "--send", "127.0.0.1:%d" % port],
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 1


def test_demo_doc_counts_are_the_demos_own(tmp_path):
    """docs/demo.md's planted-problem counts are those of deploy/demo.sh's
    run: its seed and 28 days from the default start, recounted here from
    the simulator's own manifest (its ground truth)."""
    with open(os.path.join(ROOT, "deploy", "demo.sh")) as f:
        demo = f.read()
    seed = re.search(r"seed=\$\{DEMO_SEED:-(\d+)\}", demo).group(1)
    days = re.search(r"days=\$\{DEMO_DAYS:-(\d+)\}", demo).group(1)
    with open(os.path.join(ROOT, "docs", "demo.md")) as f:
        doc = f.read()
    claims = {}
    for row in doc.splitlines():
        tag = re.match(r"\| `([a-z-]+)` \|", row)
        count = re.search(r"(\d+) exams with seed (\d+)", row)
        if tag and count:
            assert count.group(2) == seed, "%s: counted with seed %s, the demo uses %s" % (
                tag.group(1), count.group(2), seed)
            claims[tag.group(1)] = int(count.group(1))
        elif tag and "exactly 3 exams" in row:
            claims[tag.group(1)] = 3
    assert len(claims) >= 4, claims
    out = tmp_path / "demo"
    # the pixel matrix does not change the random stream, only file sizes
    made = subprocess.run([BINARY, "simulate", "--days", days, "--seed", seed, "--matrix", "4x4",
                           "--out", str(out)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                          text=True, timeout=600)
    assert made.returncode == 0, made.stderr
    studies = collections.defaultdict(set)
    with open(out / "manifest.csv", newline="") as f:
        for row in csv.DictReader(f):
            for planted in filter(None, row["planted"].split(";")):
                studies[planted].add(row["study_instance_uid"])
    assert {tag: len(studies[tag]) for tag in claims} == claims


# ---------------------------------------------------------------------------
# --screens: scanners that burn the indices into the pixels
# ---------------------------------------------------------------------------

SYNTAX_NATIVE = "1.2.840.10008.1.2.1"
SYNTAX_JPEG_BASELINE = "1.2.840.10008.1.2.4.50"
SYNTAX_JPEG_LS = "1.2.840.10008.1.2.4.80"
SYNTAX_RLE = "1.2.840.10008.1.2.5"
# DCMTK's decompressors, one per compressed syntax (the reference decoder
# for files pydicom 2.3 cannot decode without plugins).
DECOMPRESSORS = {SYNTAX_JPEG_BASELINE: "dcmdjpeg", SYNTAX_JPEG_LS: "dcmdjpls",
                 SYNTAX_RLE: "dcmdrle"}
INDEX_ATTRIBUTES = {"mi": "MechanicalIndex", "tis": "SoftTissueThermalIndex",
                    "tib": "BoneThermalIndex", "tic": "CranialThermalIndex"}
PIXELS_ONLY = "northmere-nm3"


def simulate_screens(out, days, seed, *extra):
    if not os.access(BINARY, os.X_OK):
        pytest.skip("no mitilog binary at %s (set MITILOG_BINARY)" % BINARY)
    subprocess.run([BINARY, "simulate", "--out", str(out), "--days", str(days),
                    "--seed", str(seed), "--screens"] + list(extra),
                   check=True, capture_output=True)
    with open(os.path.join(str(out), "manifest.csv"), newline="") as f:
        return list(csv.DictReader(f))


@pytest.fixture(scope="module")
def screens(tmp_path_factory):
    out = tmp_path_factory.mktemp("screens")
    return out, simulate_screens(out, 2, 4)


@pytest.fixture(scope="module")
def screens_compressed(tmp_path_factory):
    """The first day of `screens`, compressed (a 1-day run: US-ROOM-1 keeps
    its first software)."""
    out = tmp_path_factory.mktemp("screens-compressed")
    return out, simulate_screens(out, 1, 4, "--compress")


def image_rows(rows):
    return [r for r in rows if r["matrix"]]


def per_device_sample(rows, count=6):
    """The first images of each device (both software versions), plus
    every row of a planted header mismatch."""
    sample, seen = [], collections.Counter()
    for row in image_rows(rows):
        key = (row["device"], row["software_versions"])
        if seen[key] < count or "header-mismatch" in row["planted"]:
            sample.append(row)
            seen[key] += 1
    return sample


def value_of(text):
    """The number at the end of a drawn index text ("TIb0.8" -> "0.8")."""
    digits = text.rstrip()
    start = len(digits)
    while start > 0 and (digits[start - 1].isdigit() or digits[start - 1] == "."):
        start -= 1
    return digits[start:]


def box_of(row, index):
    x, y, w, h = (int(v) for v in row[index + "_box"].split())
    return x, y, w, h


def frames_of(ds):
    pixels = ds.pixel_array
    if int(ds.get("NumberOfFrames", 1) or 1) == 1:
        pixels = pixels[None, ...]
    if pixels.ndim == 3:
        pixels = pixels[..., None]
    return pixels   # frames x rows x columns x samples


def test_screens_draw_text_where_the_manifest_says(screens):
    """Every index the manifest says was drawn has ink inside its box on
    every frame (the same ink on each), and its box is inside the frame
    (reference: pydicom's decoding of the native pixel data, numpy)."""
    import numpy
    out, rows = screens
    checked = collections.Counter()
    for row in per_device_sample(rows):
        ds = pydicom.dcmread(os.path.join(str(out), row["path"]))
        frames = frames_of(ds)
        assert "%dx%d" % (ds.Columns, ds.Rows) == row["matrix"]
        for index in INDEX_ATTRIBUTES:
            if not row[index + "_text"]:
                continue
            x, y, w, h = box_of(row, index)
            assert 0 <= x and 0 <= y and x + w <= ds.Columns and y + h <= ds.Rows
            region = frames[:, y:y + h, x:x + w, :].astype(numpy.int16)
            assert region[0].max() >= 100, (row["path"], index)   # bright ink
            assert (region[0] == 0).any()                         # on black
            assert (region == region[0]).all(), "text differs between frames"
            # the box is tight: every edge row and column holds ink
            ink = region[0].max(axis=2) > 0
            assert ink[0, :].any() and ink[-1, :].any()
            assert ink[:, 0].any() and ink[:, -1].any()
            checked[row["device"]] += 1
    assert set(checked) == {"ambervale-av40-4.0.2", "ambervale-av40-4.1.0",
                            "northmere-nm7", "ambervale-av62", PIXELS_ONLY,
                            "mitilog-sim-us-5"}


def test_headers_hold_the_drawn_values(screens):
    """The header's MI/TIS/TIB/TIC (pydicom) equal the values drawn, to
    the device's decimals; the pixels-only scanner writes none; the planted
    stale header differs from its screen and equals the capture before."""
    out, rows = screens
    mismatches = 0
    for row in per_device_sample(rows):
        ds = pydicom.dcmread(os.path.join(str(out), row["path"]),
                             stop_before_pixels=True)
        drawn = {i: value_of(row[i + "_text"]) for i in INDEX_ATTRIBUTES
                 if row[i + "_text"]}
        header = {i: str(ds.data_element(a).value) for i, a in INDEX_ATTRIBUTES.items()
                  if a in ds}
        if row["device"] == PIXELS_ONLY:
            assert row["header_indices"] == "0" and header == {}
            assert drawn, "a pixels-only scanner still draws its indices"
            continue
        assert row["header_indices"] == "1"
        assert set(header) == set(drawn), row["path"]
        decimals = 2 if row["device"] == "northmere-nm7" else 1
        for value in list(drawn.values()) + list(header.values()):
            assert len(value.split(".")[1]) == decimals, (row["path"], value)
        if "header-mismatch" in row["planted"]:
            mismatches += 1
            assert header != drawn
            before = rows[rows.index(row) - 1]
            assert before["study_instance_uid"] == row["study_instance_uid"]
            assert header == {i: value_of(before[i + "_text"]) for i in drawn}
        else:
            assert header == drawn, row["path"]
    assert mismatches > 0, "the planted stale header is missing"
    tagged = {r["device"] for r in rows if "header-mismatch" in r["planted"]}
    assert tagged == {"northmere-nm7"}


def test_screen_designs_vary(screens):
    """Label variants, one- and two-decimal scanners, and each device one
    identity (Manufacturer, Model Name, Software Versions, Rows x Columns);
    US-ROOM-1's software changes in the middle of the run and its index
    text moves."""
    out, rows = screens
    texts = [r[i + "_text"] for r in image_rows(rows) for i in INDEX_ATTRIBUTES
             if r[i + "_text"]]
    for prefix in ("MI ", "MI:", "TIs ", "TIS:", "TIS ", "TIC ", "TIb0.", "TIb1."):
        assert any(t.startswith(prefix) for t in texts if t[len(prefix):][:1] != " "), prefix
    identities = collections.defaultdict(set)
    for row in image_rows(rows)[::7]:
        ds = pydicom.dcmread(os.path.join(str(out), row["path"]), stop_before_pixels=True)
        identities[row["device"]].add((ds.Manufacturer, ds.ManufacturerModelName,
                                       ds.SoftwareVersions, ds.Rows, ds.Columns,
                                       ds.StationName))
    for device, seen in identities.items():
        assert len(seen) == 1, (device, seen)
    room1 = {r["software_versions"]: r for r in image_rows(rows) if r["room"] == "US-ROOM-1"}
    assert set(room1) == {"4.0.2", "4.1.0"}
    assert room1["4.0.2"]["path"] < room1["4.1.0"]["path"]   # day 1, then day 2
    assert box_of(room1["4.0.2"], "mi")[1] < 72 < box_of(room1["4.1.0"], "mi")[1]
    assert [r["room"] for r in image_rows(rows) if r["device"] == PIXELS_ONLY][0] == "US-ROOM-4"


def test_screens_are_deterministic(screens_compressed, tmp_path):
    """The same seed gives byte-identical files with --screens --compress
    (FreeType rendering and DCMTK's encoders included: DCMTK 3.6.7's
    JPEG-LS encoder left its pad byte unwritten, which this caught)."""
    out, _ = screens_compressed
    simulate_screens(tmp_path / "again", 1, 4, "--compress")
    a, b = digests(out), digests(tmp_path / "again")
    assert len(a) > 100 and a == b


def decompressed(path, syntax, tmp_path):
    """pydicom dataset of a file, decompressed first with DCMTK's own tool
    when pydicom has no decoder for its syntax."""
    if syntax == SYNTAX_NATIVE:
        return pydicom.dcmread(path)
    tool = DECOMPRESSORS[syntax]
    if shutil.which(tool) is None:
        pytest.skip("%s not installed" % tool)
    target = os.path.join(str(tmp_path), os.path.basename(os.path.dirname(path))
                          + "-" + os.path.basename(path))
    subprocess.run([tool, path, target], check=True, capture_output=True)
    return pydicom.dcmread(target)


def test_compressed_files_keep_pixels_and_pass_dciodvfy(screens, screens_compressed, tmp_path):
    """--compress: each scanner's images in its own syntax; decoded with
    DCMTK's dcmdjpls/dcmdrle/dcmdjpeg they equal the uncompressed run's
    pixels exactly (lossless) or closely (JPEG baseline, quality 90), and
    the drawn text is still there; dciodvfy reports no error on any kind,
    exam type or device; the SOP Instance UIDs are those of the
    uncompressed run."""
    import numpy
    plain_out, plain_rows = screens
    out, rows = screens_compressed
    plain = {r["path"]: r for r in plain_rows}
    assert {r["path"] for r in rows} < set(plain)   # the first of two days
    syntaxes = collections.defaultdict(set)
    for row in rows:
        syntaxes[row["device"]].add(row["transfer_syntax"])
    assert syntaxes["northmere-nm7"] == {SYNTAX_JPEG_BASELINE}
    assert syntaxes[PIXELS_ONLY] == {SYNTAX_RLE}
    assert SYNTAX_JPEG_LS in syntaxes["mitilog-sim-us-5"]
    for row in per_device_sample(rows, 2):
        other = plain[row["path"]]
        if "resend" in row["planted"] + other["planted"]:
            continue   # the resend falls on the last day of each run
        assert row["sop_instance_uid"] == other["sop_instance_uid"]
        assert row["mi_text"] == other["mi_text"] and row["mi_box"] == other["mi_box"]
        ds = pydicom.dcmread(os.path.join(str(out), row["path"]), stop_before_pixels=True)
        assert ds.file_meta.TransferSyntaxUID == row["transfer_syntax"]
        a = frames_of(decompressed(os.path.join(str(out), row["path"]),
                                   row["transfer_syntax"], tmp_path)).astype(numpy.int16)
        b = frames_of(pydicom.dcmread(os.path.join(str(plain_out), row["path"]))).astype(numpy.int16)
        if row["transfer_syntax"] == SYNTAX_JPEG_BASELINE:
            assert a.shape == b.shape   # dcmdjpeg converts YBR back to RGB
            assert numpy.abs(a - b).mean() < 4.0
            x, y, w, h = box_of(row, "mi")
            assert a[0, y:y + h, x:x + w].max() >= 100
        else:
            assert (a == b).all(), row["path"]
    if shutil.which("dciodvfy") is None:
        pytest.skip("dciodvfy not installed")
    sample, exam_types, rooms = dciodvfy_sample(out)
    assert len(rooms) == 5
    for path, key in sorted(sample.items()):
        assert dciodvfy_errors(path) == [], (key, path)


def test_screens_dciodvfy_native(screens):
    """dciodvfy (dicom3tools) on every kind, exam type and device of the
    uncompressed screen run: no error."""
    if shutil.which("dciodvfy") is None:
        pytest.skip("dciodvfy not installed")
    out, _ = screens
    sample, _, rooms = dciodvfy_sample(out)
    assert len(rooms) == 5
    for path, key in sorted(sample.items()):
        assert dciodvfy_errors(path) == [], (key, path)


def test_screens_options_refused(tmp_path):
    if not os.access(BINARY, os.X_OK):
        pytest.skip("no mitilog binary")
    for args in (["--screens", "--matrix", "640x480"], ["--compress"]):
        run = subprocess.run([BINARY, "simulate", "--out", str(tmp_path / "x")] + args,
                             capture_output=True, text=True)
        assert run.returncode == 2, args
        assert "--" in run.stderr
