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

from conftest import BINARY, REPO, run


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
