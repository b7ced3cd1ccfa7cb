"""Extraction of the exam context end to end: modes, transducer, exam
classification, SR values, exam records and the API fields.

Independent readers: pydicom for every attribute, DCMTK's dsrdump for SR
content. Run with /usr/bin/python3 -m pytest (Debian's python3-pydicom).
"""

import glob
import os
import re
import subprocess

import pydicom
import pytest
from pydicom.dataset import Dataset, FileMetaDataset
from pydicom.sequence import Sequence
from pydicom.uid import ExplicitVRLittleEndian, generate_uid

from conftest import BINARY, run

# reference: DICOM PS3.3 C.8.5.6.1.1, US Image Type value 4 bitmap
IMAGE_TYPE_BITS = {0x0001: "2d", 0x0002: "m", 0x0004: "cw", 0x0008: "pw",
                   0x0010: "colour", 0x0020: "colour_m", 0x0040: "3d",
                   0x0100: "power", 0x0200: "tissue_characterization",
                   0x0400: "spatially_related_frames"}
# reference: DICOM PS3.3 C.8.5.5.1.2 Region Data Type; spatial format 2 = M
MODE_ORDER = list(IMAGE_TYPE_BITS.values())
SR_CLASSES = {"1.2.840.10008.5.1.4.1.1.88.33", "1.2.840.10008.5.1.4.1.1.88.22",
              "1.2.840.10008.5.1.4.1.1.88.34"}


def reference_modes(ds):
    """(image_type modes, region modes) as pydicom reads them."""
    bitmap = set()
    it = ds.get("ImageType")
    if it is not None and len(it) >= 4 and re.fullmatch(r"[0-9A-Fa-f]{4}", str(it[3]).strip()):
        value = int(str(it[3]).strip(), 16)
        bitmap = {name for bit, name in IMAGE_TYPE_BITS.items() if value & bit}
    regions = set()
    for region in ds.get("SequenceOfUltrasoundRegions", []):
        kind, spatial = region.get("RegionDataType"), region.get("RegionSpatialFormat")
        if kind == 1:
            regions.add("m" if spatial == 2 else "2d")
        elif kind == 2:
            regions.add("colour_m" if spatial == 2 else "colour")
        elif kind == 3:
            regions.add("pw")
        elif kind == 4:
            regions.add("cw")
    return bitmap, regions


def dsrdump_nums(path):
    """(scheme, code, value, unit) of every NUM item, as dsrdump shows it."""
    out = run(["dsrdump", "-Ee", "+Pc", path]).stdout  # +Pc: concept name codes too
    found = []
    for m in re.finditer(r'NUM:\(([^,]*),([^,]*),"[^"]*"\)="([^"]*)" \(([^,]*),', out):
        code_value, scheme, value, unit = m.groups()
        found.append((scheme, code_value, value, unit))
    return found


@pytest.fixture(scope="module")
def simulated(module_daemon_factory, tmp_path_factory):
    out = str(tmp_path_factory.mktemp("sim"))
    result = run([BINARY, "simulate", "--out", out, "--days", "1", "--seed", "3"])
    assert result.returncode == 0, result.stderr
    daemon = module_daemon_factory("sim").start()
    files = sorted(glob.glob(os.path.join(out, "**", "*.dcm"), recursive=True))
    sent = daemon.storescu(files, options=["-nh"])
    assert sent.returncode == 0, sent.stderr
    return daemon, files


def wait_exams(daemon, studies):
    import time
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        with daemon.db() as db:
            n = db.execute("SELECT count(*) FROM exams").fetchone()[0]
        if n >= studies:
            return
        time.sleep(0.2)
    raise AssertionError("exam records not built")


def test_simulator_fields_match_pydicom(simulated):
    daemon, files = simulated
    instances = {i["sop_instance_uid"]: i for i in
                 daemon.get_json("/api/v1/instances?limit=10000")}
    assert len(instances) == len(files)
    for path in files:
        ds = pydicom.dcmread(path, stop_before_pixels=True)
        row = instances[str(ds.SOPInstanceUID)]
        bitmap, regions = reference_modes(ds)
        assert set(row["mode_sources"].get("image_type", [])) == bitmap, path
        assert set(row["mode_sources"].get("region_data_type", [])) == regions, path
        assert row["modes_conflict"] is False
        if str(ds.SOPClassUID) in SR_CLASSES:
            assert row["object_kind"] == "sr"
        else:
            # PS3.3 C.8.5.6.1.1: with Color Power Mode and no Color Doppler
            # bit, the color flow region shows power, not colour Doppler.
            shown = regions - {"colour"} if "power" in bitmap and "colour" not in bitmap \
                else regions
            expected = [m for m in MODE_ORDER if m in bitmap | shown]
            assert row["modes"] == expected
            assert row["transducer"] == str(ds.TransducerData)
            assert row["source"]["transducer"] == "transducer_data"
            assert row["transducer_type"] == ds.get("TransducerType")
            khz = ds.SequenceOfUltrasoundRegions[0].TransducerFrequency
            assert row["frequency_mhz"] == pytest.approx(khz / 1000.0)
            assert row["source"]["frequency_mhz"] == "ultrasound_region_1"
            assert row["body_part_examined"] == ds.get("BodyPartExamined")
        assert row["preset"] == str(ds.ProtocolName)
        assert row["source"]["preset"] == "protocol_name"
        assert row["room"] is not None and row["source"]["room"] == "station_name_map"
        assert row["shift"] in ("day", "evening", "night")
        assert row["age_group"] in ("neonate", "child", "adult")
        assert row["exam_type"] is not None, (path, row["study_description"])


def test_every_simulated_exam_classified(simulated):
    daemon, files = simulated
    studies = {pydicom.dcmread(p, stop_before_pixels=True).StudyInstanceUID for p in files}
    wait_exams(daemon, len(studies))
    listed = daemon.get_json("/api/v1/studies")
    assert len(listed) == len(studies)
    for study in listed:
        assert study["exam_type"] not in (None, "unclassified"), study
        assert study["governing_index"] in ("tis", "tib", "tic")
        assert isinstance(study["modes"], list)
    one = daemon.get_json("/api/v1/studies/" + listed[0]["study_instance_uid"])
    assert one["timeline_summary"]["estimate"] is True
    assert len(one["timeline"]) == one["timeline_summary"]["timed_count"]
    assert sum(t["attributed_seconds"] for t in one["timeline"]) == pytest.approx(
        one["timeline_summary"]["estimated_seconds"])
    assert daemon.get("/api/v1/studies/9.9.9")[0] == 404
    assert daemon.get("/api/v1/studies/not-a-uid")[0] == 400


def test_sr_values_match_dsrdump(simulated):
    daemon, files = simulated
    instances = {i["sop_instance_uid"]: i for i in
                 daemon.get_json("/api/v1/instances?limit=10000")}
    checked = 0
    for path in files:
        ds = pydicom.dcmread(path, stop_before_pixels=True)
        if str(ds.SOPClassUID) not in SR_CLASSES:
            continue
        expected = sorted((s + ":" + c, float(v), u) for s, c, v, u in dsrdump_nums(path))
        got = sorted((v["concept"], v["value"], v["unit"])
                     for v in instances[str(ds.SOPInstanceUID)]["sr_values"])
        assert got == expected, path
        checked += 1
    assert checked > 0


# ---------------------------------------------------------------------------
# Hand-made fixtures (pydicom)
# ---------------------------------------------------------------------------

def write(ds, path, sop_class):
    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = sop_class
    meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    meta.TransferSyntaxUID = ExplicitVRLittleEndian
    ds.file_meta = meta
    ds.SOPClassUID = sop_class
    ds.is_little_endian, ds.is_implicit_VR = True, False
    ds.save_as(path, write_like_original=False)
    return path


def base(study_uid=None, **attributes):
    ds = Dataset()
    ds.SOPInstanceUID = generate_uid()
    ds.StudyInstanceUID = study_uid or generate_uid()
    ds.SeriesInstanceUID = generate_uid()
    ds.StudyDate, ds.StudyTime = "20240501", "100000"
    ds.ContentDate, ds.ContentTime = "20240501", "101000"
    ds.PatientID, ds.PatientBirthDate = "X1", "19800101"
    for key, value in attributes.items():
        setattr(ds, key, value)
    return ds


def code(scheme, value, meaning):
    c = Dataset()
    c.CodingSchemeDesignator, c.CodeValue, c.CodeMeaning = scheme, value, meaning
    return c


def num(scheme, value, meaning, number, unit):
    item = Dataset()
    item.RelationshipType, item.ValueType = "CONTAINS", "NUM"
    item.ConceptNameCodeSequence = Sequence([code(scheme, value, meaning)])
    measured = Dataset()
    measured.NumericValue = number
    if unit is not None:
        measured.MeasurementUnitsCodeSequence = Sequence([code("UCUM", unit, unit)])
    item.MeasuredValueSequence = Sequence([measured])
    return item


def structured_report(path, children, study_uid=None):
    ds = base(study_uid, Modality="SR", ValueType="CONTAINER",
              ContinuityOfContent="SEPARATE", CompletionFlag="COMPLETE",
              VerificationFlag="UNVERIFIED", StudyDescription="US OB 2ND TRI")
    ds.ConceptNameCodeSequence = Sequence([code("DCM", "125000", "OB-GYN Ultrasound Procedure Report")])
    ds.ContentSequence = Sequence(children)
    return write(ds, path, "1.2.840.10008.5.1.4.1.1.88.33")


def nested(depth, leaf):
    item = leaf
    for level in range(depth):
        container = Dataset()
        container.RelationshipType, container.ValueType = "CONTAINS", "CONTAINER"
        container.ContinuityOfContent = "SEPARATE"
        container.ConceptNameCodeSequence = Sequence([code("DCM", "111000", "Level %d" % level)])
        container.ContentSequence = Sequence([item])
        item = container
    return item


def inspect(path, config=None):
    cmd = [BINARY, "inspect"] + (["--config", config] if config else []) + [path]
    result = run(cmd)
    values = {}
    for line in result.stdout.splitlines():
        m = re.match(r"^(\S+)\s+(.*?)(?:  \[(.*)\])?$", line)
        if m and not line.startswith("#"):
            values.setdefault(m.group(1), []).append((m.group(2), m.group(3)))
    return result.returncode, values


def test_unknown_scheme_logged_once_and_deep_sr(daemon_factory, tmp_path):
    daemon = daemon_factory("sr").start()
    study = generate_uid()
    a = structured_report(str(tmp_path / "a.dcm"),
                          [num("99UNKNOWN", "X1", "Vendor MI", "1.3", "1"),
                           num("LN", "18185-9", "Gestational age", "140", "d")], study)
    b = structured_report(str(tmp_path / "b.dcm"),
                          [num("99UNKNOWN", "X1", "Vendor MI", "1.1", "1")], study)
    deep = structured_report(str(tmp_path / "deep.dcm"),
                             [nested(50, num("LN", "18185-9", "Gestational age", "9", "wk"))])
    sent = daemon.storescu([a, b, deep])
    assert sent.returncode == 0, sent.stderr
    rows = {i["sop_instance_uid"]: i for i in daemon.get_json("/api/v1/instances")}
    ra = rows[pydicom.dcmread(a).SOPInstanceUID]
    assert [v["concept"] for v in ra["sr_values"]] == ["LN:18185-9"]  # unknown ignored
    assert ra["gestational_age_weeks"] == pytest.approx(20.0)  # 140 d
    assert daemon.log().count("coding scheme '99UNKNOWN'") == 1
    expected = dsrdump_nums(deep)
    assert expected == [("LN", "18185-9", "9", "wk")]
    rd = rows[pydicom.dcmread(deep).SOPInstanceUID]
    assert len(rd["sr_values"]) == 1
    assert rd["sr_values"][0]["item_position"] == ".".join(["1"] * 52)
    assert rd["gestational_age_weeks"] == pytest.approx(9.0)
    assert rd["governing_index"] == "tis"  # obstetric below 10 weeks


def test_enhanced_us_volume(daemon_factory, tmp_path):
    frames = 4
    ds = base(Modality="US", StudyDescription="Fetal anatomy 3D",
              ProtocolName="OB 3D", ImageType=["ORIGINAL", "PRIMARY", "VOLUME", "0041"],
              MechanicalIndex="0.8", SoftTissueThermalIndex="0.3", BoneThermalIndex="0.9",
              NumberOfFrames=str(frames), AcquisitionDateTime="20240501101500",
              Rows=4, Columns=4, SamplesPerPixel=1, BitsAllocated=8, BitsStored=8,
              HighBit=7, PixelRepresentation=0, PhotometricInterpretation="MONOCHROME2",
              TransducerData=["VOL4-8"])
    per_frame = []
    for i in range(frames):
        group, content = Dataset(), Dataset()
        content.FrameAcquisitionDateTime = "2024050110150%d" % i
        content.FrameAcquisitionDuration = 250.0
        group.FrameContentSequence = Sequence([content])
        per_frame.append(group)
    ds.PerFrameFunctionalGroupsSequence = Sequence(per_frame)
    ds.SharedFunctionalGroupsSequence = Sequence([Dataset()])
    ds.PixelData = bytes(16 * frames)
    path = write(ds, str(tmp_path / "volume.dcm"), "1.2.840.10008.5.1.4.1.1.6.2")
    daemon = daemon_factory("vol").start()
    assert daemon.storescu([path]).returncode == 0
    row = daemon.get_json("/api/v1/instances")[0]
    assert row["object_kind"] == "volume"
    assert row["mi"] == pytest.approx(float(ds.MechanicalIndex))
    assert row["tib"] == pytest.approx(float(ds.BoneThermalIndex))
    assert row["modes"] == ["2d", "3d"]
    assert row["cine_seconds"] == pytest.approx(frames * 0.25)
    assert row["exam_type"] == "obstetric_second"
    assert row["transducer"] == "VOL4-8"


@pytest.mark.parametrize("charset,encoding", [("ISO_IR 100", "latin-1"), ("ISO_IR 192", "utf-8")])
def test_names_round_trip_as_utf8(daemon_factory, tmp_path, charset, encoding):
    description = "Échographie obstétricale T2"
    station = "SALLE-ÉCHO"
    ds = base(Modality="US", SpecificCharacterSet=charset, StudyDescription=description,
              StationName=station, ProtocolName="Obstétrique", MechanicalIndex="1.0",
              ImageType=["ORIGINAL", "PRIMARY", "OBSTETRICAL", "0001"],
              SeriesDescription="x" * 70)  # LO allows 64: stored whole, flagged
    path = write(ds, str(tmp_path / "name.dcm"), "1.2.840.10008.5.1.4.1.1.6.1")
    raw = pydicom.dcmread(path)
    assert raw["StudyDescription"].value == description  # pydicom decodes it
    daemon = daemon_factory("cs").start()
    assert daemon.storescu([path]).returncode == 0
    row = daemon.get_json("/api/v1/instances")[0]
    assert row["study_description"] == description
    assert row["station_name"] == station
    assert row["room"] == station and row["source"]["room"] == "station_name"
    assert row["preset"] == "Obstétrique"
    assert row["exam_type"] == "obstetric_second"
    assert row["series_description"] == "x" * 70
    assert row["overlong_fields"] == ["series_description"]
    code_, values = inspect(path)
    assert code_ == 0
    assert values["study_description"][0][0] == description
    assert values["exam_type"][0] == ("obstetric_second", "study_description")


def test_inspect_unreadable(tmp_path):
    bad = tmp_path / "bad.dcm"
    bad.write_bytes(b"not dicom at all" * 10)
    assert run([BINARY, "inspect", str(bad)]).returncode == 1


def test_check_config_reports_bad_regex(tmp_path):
    site = tmp_path / "site.ini"
    site.write_text("[exam_type a]\nmatch = (open\n")
    main = tmp_path / "mitilog.ini"
    main.write_text("[site]\nrules = site.ini\n")
    result = run([BINARY, "check-config", str(main)])
    assert result.returncode == 2
    assert re.search(r"site\.ini:2: \[exam_type a\] match: bad regular expression", result.stderr)


def test_cine_timed_by_frame_time_vector(daemon_factory, tmp_path):
    # reference: DICOM PS3.3 C.7.6.5.1.2 (Cine module): Frame Time Vector
    # holds the time from the previous frame, 0 for the first; Frame
    # Increment Pointer names it when there is no Frame Time.
    vector = ["0", "30", "40", "35", "45"]
    ds = base(Modality="US", StudyDescription="Abdomen", MechanicalIndex="0.9",
              ImageType=["ORIGINAL", "PRIMARY", "ABDOMINAL", "0001"],
              NumberOfFrames=str(len(vector)), FrameTimeVector=vector,
              FrameIncrementPointer=0x00181065,
              Rows=2, Columns=2, SamplesPerPixel=1, BitsAllocated=8, BitsStored=8,
              HighBit=7, PixelRepresentation=0, PhotometricInterpretation="MONOCHROME2")
    ds.PixelData = bytes(4 * len(vector))
    path = write(ds, str(tmp_path / "cine.dcm"), "1.2.840.10008.5.1.4.1.1.3.1")
    values = [float(v) for v in pydicom.dcmread(path).FrameTimeVector]  # independent reader
    daemon = daemon_factory("ftv").start()
    assert daemon.storescu([path]).returncode == 0
    row = daemon.get_json("/api/v1/instances")[0]
    assert row["frame_time_ms"] == pytest.approx(sum(values[1:]) / (len(values) - 1))
    assert row["cine_seconds"] == pytest.approx(sum(values) / 1000.0)


def test_power_mode_region_is_not_colour_doppler(daemon_factory, tmp_path):
    # reference: DICOM PS3.3 C.8.5.6.1.1: 0100 Color Power Mode, 0010 Color
    # Doppler; C.8.5.5.1.2: Region Data Type 0002 color flow, where either is
    # drawn. Bitmap 0101 = 2D + power only.
    tissue, flow = Dataset(), Dataset()
    for region, kind in ((tissue, 1), (flow, 2)):
        region.RegionDataType, region.RegionSpatialFormat = kind, 1
        region.RegionLocationMinX0, region.RegionLocationMinY0 = 0, 0
        region.RegionLocationMaxX1, region.RegionLocationMaxY1 = 1, 1
        region.RegionFlags = 0
    ds = base(Modality="US", StudyDescription="Renal", MechanicalIndex="0.9",
              ImageType=["ORIGINAL", "PRIMARY", "ABDOMINAL", "0101"],
              SequenceOfUltrasoundRegions=Sequence([tissue, flow]))
    path = write(ds, str(tmp_path / "power.dcm"), "1.2.840.10008.5.1.4.1.1.6.1")
    bitmap, regions = reference_modes(pydicom.dcmread(path))
    assert bitmap == {"2d", "power"} and regions == {"2d", "colour"}
    daemon = daemon_factory("power").start()
    assert daemon.storescu([path]).returncode == 0
    row = daemon.get_json("/api/v1/instances")[0]
    assert row["modes"] == ["2d", "power"]
