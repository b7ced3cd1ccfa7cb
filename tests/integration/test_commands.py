"""The subcommands as a new user meets them: read-only commands that never
create a database, the README's report examples run as written, usage
errors named in plain words, and messages for files that are not DICOM.

Run with /usr/bin/python3 -m pytest (Debian's python3-pydicom)."""

import os
import re
import shlex

import pydicom
import pytest
from pydicom.dataset import Dataset, FileMetaDataset
from pydicom.uid import ExplicitVRLittleEndian, generate_uid

from conftest import BINARY, REPO, free_port, run


# ---------------------------------------------------------------------------
# Read-only commands
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("command", [["report", "week"], ["report", "stats"],
                                     ["header", "1.2.3.4"]])
def test_read_only_command_never_creates_a_database(tmp_path, command):
    # common practice, no source: a command that only reads must not leave
    # an empty database behind, and must say where it looked.
    result = run([BINARY] + command, cwd=str(tmp_path))
    assert result.returncode == 1, result.stdout + result.stderr
    assert os.listdir(tmp_path) == [], "the command created %s" % os.listdir(tmp_path)
    expected = os.path.join(str(tmp_path), "var", "mitilog.sqlite3")
    assert expected in result.stderr
    assert "[storage] data_directory" in result.stderr
    assert "--config" in result.stderr


def test_inspect_creates_nothing(tmp_path):
    # inspect reads one file and the site rules; it never opens a database.
    work = tmp_path / "work"
    work.mkdir()
    path = us_image(tmp_path / "one.dcm")
    result = run([BINARY, "inspect", str(path)], cwd=str(work))
    assert result.returncode == 0, result.stderr
    assert os.listdir(work) == []


def test_readme_says_which_week_the_dashboard_shows():
    # The dashboard opens on the review worklist, whose default week
    # (/api/v1/worklist without a week) and the weekly list's
    # (/api/v1/outliers without a week) docs/api.md states (checked against
    # the data in test_review.py and test_reports.py); README must say it.
    with open(os.path.join(REPO, "README.md")) as f:
        readme = " ".join(f.read().split())
    with open(os.path.join(REPO, "docs", "api.md")) as f:
        api = " ".join(f.read().split())
    assert "default: the last complete ISO week that holds data" in api
    assert "**last complete week that holds data**" in api
    assert re.search(r"dashboard \(`[^`]*`\) opens on the \*\*review worklist\*\* of the last "
                     r"complete ISO 8601 week \(Monday to Sunday\) that holds data", readme), \
        "README.md does not say which week the dashboard shows"
    with open(os.path.join(REPO, "web", "week.js")) as f:
        week_js = f.read()
    assert "(week ? '&week=' + encodeURIComponent(week) : '')" in week_js
    with open(os.path.join(REPO, "web", "review.js")) as f:
        review_js = f.read()
    assert "(week ? `?week=${encodeURIComponent(week)}` : '')" in review_js


def test_read_only_command_with_a_config_names_it(tmp_path):
    data = tmp_path / "data"
    config = tmp_path / "site.ini"
    config.write_text("[storage]\ndata_directory = %s\n" % data)
    result = run([BINARY, "report", "week", "--config", str(config)], cwd=str(tmp_path))
    assert result.returncode == 1
    assert not data.exists()
    assert str(config) in result.stderr
    assert str(data / "mitilog.sqlite3") in result.stderr


def readme_report_lines():
    """The `build/mitilog report ...` lines of README.md's sh blocks."""
    with open(os.path.join(REPO, "README.md")) as f:
        text = f.read()
    lines = []
    for block in re.findall(r"```sh\n(.*?)```", text, re.S):
        lines += [line.strip() for line in block.splitlines()
                  if line.strip().startswith("build/mitilog report")]
    return lines


def test_readme_report_examples_work_after_the_demo(tmp_path):
    # The layout deploy/demo.sh leaves at the repository root: build/mitilog
    # and demo-data/mitilog.ini naming demo-data/var; its seed (2026) and
    # start (2026-11-02), here one week of it (ISO week 47).
    lines = readme_report_lines()
    assert len(lines) >= 2, "README.md shows the report examples"
    root = tmp_path
    (root / "build").mkdir()
    os.symlink(BINARY, str(root / "build" / "mitilog"))
    (root / "demo-data").mkdir()
    (root / "demo-data" / "mitilog.ini").write_text(
        "[storage]\ndata_directory = %s\nretention = header\n" % (root / "demo-data" / "var"))
    simulated = root / "simulated"
    made = run([BINARY, "simulate", "--days", "7", "--start", "2026-11-16",
                "--seed", "2026", "--out", str(simulated)], timeout=300)
    assert made.returncode == 0, made.stderr
    days = sorted(str(p) for p in simulated.iterdir() if p.is_dir())
    imported = run([BINARY, "import", "--config", str(root / "demo-data" / "mitilog.ini")]
                   + days, timeout=600)
    assert imported.returncode == 0, imported.stderr[-2000:]
    for line in lines:
        words = shlex.split(line)
        assert "--config" in words, "%s: runs against the demo's database" % line
        result = run(words, cwd=str(root))
        assert result.returncode == 0, line + "\n" + result.stderr
        if "--output" in words:
            with open(root / words[words.index("--output") + 1]) as f:
                body = f.read()
            match = re.search(r"(\d+) exams this week", body)
            assert match and int(match.group(1)) > 0, line
        else:
            rows = [r for r in result.stdout.splitlines() if r.startswith("row,")]
            assert rows, line + ": no exam type in the period"


# ---------------------------------------------------------------------------
# Usage errors
# ---------------------------------------------------------------------------

def test_import_of_a_missing_path_is_a_usage_error(tmp_path):
    config = tmp_path / "mitilog.ini"
    config.write_text("[storage]\ndata_directory = %s\n" % (tmp_path / "var"))
    missing = str(tmp_path / "nonexistent")
    result = run([BINARY, "import", "--config", str(config), missing])
    assert result.returncode == 2, result.stdout + result.stderr
    assert missing in result.stderr
    assert "rejected" not in result.stdout
    assert not (tmp_path / "var").exists()


@pytest.mark.parametrize("value", ["yesterday", "2026-13-01", "2026-02-30", "2026-2-01",
                                   "2026-11-01x"])
def test_rescore_names_a_bad_date(tmp_path, value):
    # reference: ISO 8601 calendar date YYYY-MM-DD, proleptic Gregorian
    # calendar (February 2026 has 28 days; there is no month 13).
    result = run([BINARY, "rescore", "--config", str(tmp_path / "none.ini"),
                  "--from", value])
    assert result.returncode == 2
    assert "--from '%s' is not a calendar date" % value in result.stderr


def test_rescore_accepts_a_leap_day_and_refuses_a_reversed_period(tmp_path):
    # reference: 2028 is a leap year (divisible by 4, not by 100).
    config = tmp_path / "mitilog.ini"
    config.write_text("[storage]\ndata_directory = %s\n" % (tmp_path / "var"))
    (tmp_path / "empty").mkdir()
    assert run([BINARY, "import", "--config", str(config), str(tmp_path / "empty")]).returncode == 0
    ok = run([BINARY, "rescore", "--config", str(config), "--from", "2028-02-29",
              "--to", "2028-03-01"])
    assert ok.returncode == 0, ok.stderr
    reversed_ = run([BINARY, "rescore", "--config", str(config), "--from", "2026-11-05",
                     "--to", "2026-11-01"])
    assert reversed_.returncode == 2
    assert "after" in reversed_.stderr


# ---------------------------------------------------------------------------
# Files that are not (whole) DICOM
# ---------------------------------------------------------------------------

def us_image(path, pixels=4096):
    ds = Dataset()
    ds.SOPInstanceUID, ds.StudyInstanceUID = generate_uid(), generate_uid()
    ds.SeriesInstanceUID = generate_uid()
    ds.Modality, ds.MechanicalIndex = "US", "1.0"
    ds.Rows, ds.Columns, ds.SamplesPerPixel = 64, pixels // 64, 1
    ds.BitsAllocated, ds.BitsStored, ds.HighBit = 8, 8, 7
    ds.PixelRepresentation, ds.PhotometricInterpretation = 0, "MONOCHROME2"
    ds.PixelData = bytes(pixels)
    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = ds.SOPClassUID = "1.2.840.10008.5.1.4.1.1.6.1"
    meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    meta.TransferSyntaxUID = ExplicitVRLittleEndian
    ds.file_meta = meta
    ds.is_little_endian, ds.is_implicit_VR = True, False
    ds.save_as(str(path), write_like_original=False)
    return path


def test_inspect_and_import_say_a_text_file_is_not_dicom(tmp_path):
    text = tmp_path / "notes.txt"
    text.write_text("Room 3 probe serviced on Tuesday.\n" * 20)
    result = run([BINARY, "inspect", str(text)])
    assert result.returncode == 1
    assert "not a DICOM file" in result.stderr and "text file" in result.stderr
    assert result.stderr.count(str(text)) == 1, result.stderr   # the path once
    assert "premature end of stream" not in result.stderr
    assert not re.search(r"^[EW]: ", result.stderr, re.M), result.stderr  # no toolkit lines
    config = tmp_path / "mitilog.ini"
    config.write_text("[storage]\ndata_directory = %s\n" % (tmp_path / "var"))
    imported = run([BINARY, "import", "--config", str(config), str(text)])
    assert imported.returncode == 1
    assert "rejected 1" in imported.stdout
    assert "not a DICOM file" in imported.stderr
    assert imported.stderr.count(str(text)) == 1, imported.stderr
    assert not re.search(r"^[EW]: ", imported.stderr, re.M), imported.stderr


def test_truncated_file_names_the_byte_and_the_element(tmp_path):
    whole = us_image(tmp_path / "whole.dcm")
    size = os.path.getsize(whole)
    # reference: PS3.5 section 7.1.2, explicit VR OB/OW: 12 bytes of tag,
    # VR, reserved and length before the value; pydicom wrote Pixel Data last.
    pixels = len(pydicom.dcmread(str(whole)).PixelData)
    pixel_element_at = size - 12 - pixels
    cut = tmp_path / "cut.dcm"
    cut_at = pixel_element_at + 100
    with open(whole, "rb") as f:
        cut.write_bytes(f.read(cut_at))
    result = run([BINARY, "inspect", str(cut)])
    assert result.returncode == 1
    message = result.stderr
    assert "truncated" in message
    assert "at byte %d of %d" % (cut_at, size) in message, message
    assert "PixelData (7fe0,0010) at byte %d declares %d bytes" % (pixel_element_at, pixels) \
        in message, message
    assert message.count(str(cut)) == 1 and "premature end of stream" not in message
    assert not re.search(r"^[EW]: ", message, re.M), message


# ---------------------------------------------------------------------------
# check-config
# ---------------------------------------------------------------------------

def shipped_policy():
    with open(os.path.join(REPO, "conf", "policy.ini")) as f:
        return f.read()


def check_config(tmp_path, main, policy=None):
    if policy is not None:
        (tmp_path / "policy.ini").write_text(policy)
        main += "\n[rules]\npolicy = policy.ini\n"
    path = tmp_path / "mitilog.ini"
    path.write_text(main)
    return run([BINARY, "check-config", str(path)])


def test_check_config_reports_every_problem_readably(tmp_path):
    # common practice, no source: a validator lists every error at once.
    result = check_config(tmp_path, "port = 104\n[storage]\nretention = everything\n"
                                    "bogus = 1\n[dicom]\nmax_pdu_bytes = -3\n")
    assert result.returncode == 2
    lines = result.stderr.splitlines()
    assert any(":1: port:" in l and "before any [section]" in l and "[dicom]" in l
               for l in lines), result.stderr
    assert "[] port" not in result.stderr
    assert any(":3: [storage] retention: 'everything' is not one of none, header or full" in l
               for l in lines), result.stderr
    assert "|" not in result.stderr
    assert any(":4: [storage] bogus: unknown key" in l for l in lines)
    assert any(":6: [dicom] max_pdu_bytes:" in l for l in lines)


def test_check_config_names_the_groups_and_the_rule_section(tmp_path):
    policy = shipped_policy()
    assert "limit.group.ophthalmic = 1.0" in policy and "[rule thermal_dose]" in policy
    policy = policy.replace("limit.group.ophthalmic = 1.0", "limit.group.opthalmic = 1.0", 1)
    policy = policy.replace("[rule thermal_dose]", "[rule thermal_dos]", 1)
    result = check_config(tmp_path, "[http]\nport = 8080\n", policy)
    assert result.returncode == 2
    # docs/policy.md lists the groups
    assert "'opthalmic' is not a group; the groups are general, obstetric, neonatal, " \
           "transcranial, ophthalmic, contrast" in result.stderr, result.stderr
    header = policy.splitlines().index("[rule thermal_dos]") + 1
    assert "policy.ini:%d: [rule thermal_dos]: 'thermal_dos' is not a rule" % header \
        in result.stderr, result.stderr
    assert "severity: unknown rule" not in result.stderr
    assert "[rules] policy" in result.stderr


def test_check_config_names_the_key_of_a_missing_policy(tmp_path):
    result = check_config(tmp_path, "[rules]\npolicy = missing.ini\n")
    assert result.returncode == 2
    assert "[rules] policy" in result.stderr and "missing.ini" in result.stderr


def test_check_config_refuses_a_data_directory_serve_refuses(tmp_path):
    main = "[storage]\ndata_directory = /proc/nope\n[dicom]\nport = %d\n[http]\nport = %d\n" % (
        free_port(), free_port())
    result = check_config(tmp_path, main)
    assert result.returncode == 2
    assert "[storage] data_directory /proc/nope" in result.stderr
    assert not os.path.exists("/proc/nope")
    serve = run([BINARY, "serve", "--config", str(tmp_path / "mitilog.ini")], timeout=60)
    assert serve.returncode != 0, "serve accepted what check-config refused"
    fine = check_config(tmp_path, "[storage]\ndata_directory = %s\n" % (tmp_path / "a" / "b"))
    assert fine.returncode == 0, fine.stderr
    assert not (tmp_path / "a").exists(), "check-config left a folder behind"


def test_check_config_cross_checks_policy_categories_with_site_exam_types(tmp_path):
    policy = shipped_policy()
    assert "limit.category.neonatal_bowel" in policy
    policy = policy.replace("limit.category.neonatal_bowel", "limit.category.neonatal_bowl", 1)
    result = check_config(tmp_path, "[http]\nport = 8080\n", policy)
    assert result.returncode == 2
    assert "category 'neonatal_bowl' is not an exam type" in result.stderr, result.stderr
    assert "neonatal_bowel" in result.stderr   # the existing keys are named


def test_serve_and_import_name_the_key_of_a_missing_policy(tmp_path):
    main = tmp_path / "mitilog.ini"
    main.write_text("[rules]\npolicy = missing.ini\n[storage]\ndata_directory = %s\n"
                    "[dicom]\nport = %d\n[http]\nport = %d\n"
                    % (tmp_path / "var", free_port(), free_port()))
    (tmp_path / "empty").mkdir()
    for command in (["serve", "--config", str(main)],
                    ["import", "--config", str(main), str(tmp_path / "empty")]):
        result = run([BINARY] + command, timeout=60)
        assert result.returncode != 0
        assert "[rules] policy: " in result.stderr and "missing.ini" in result.stderr, \
            result.stderr
