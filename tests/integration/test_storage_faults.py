"""Database locked, disk full, read-only: the object gets A700, nothing
is acknowledged that was not written, and the daemon recovers.

The disk-full and read-only cases use a small loop-mounted ext4 image
holding the data directory (needs root and loop devices; skipped with
the reason otherwise).
"""

import os
import sqlite3
import subprocess

import pytest

from conftest import BINARY, run
from sending import simulated_files, storescu_statuses

# DCMTK 3.6.7 storescu prints status A700 as "Refused: OutOfResources"
# (docs/dcmtk.md); PS3.4 B.2.3: A7xx "Refused: Out of Resources".
REFUSED = "Refused: OutOfResources"


@pytest.fixture(scope="module")
def sim(tmp_path_factory):
    files, rows = simulated_files(BINARY, tmp_path_factory.mktemp("sim"), 1)
    return files, rows


def stored_uids(daemon):
    with daemon.db() as db:
        return {u for (u,) in db.execute("SELECT sop_instance_uid FROM instances")}


def assert_nothing_false(daemon, statuses, rows):
    """Design rule: nothing acknowledged that was not written."""
    stored = stored_uids(daemon)
    lost = [f for f, s in statuses.items() if s == "Success"
            and rows[f]["sop_instance_uid"] not in stored]
    assert lost == []


@pytest.mark.sqlite_only("holds SQLite's file lock from a second connection")
def test_locked_database_answers_a700_then_recovers(daemon_factory, sim):
    files, rows = sim
    daemon = daemon_factory("locked", storage=dict(busy_timeout_ms=300)).start()
    assert set(storescu_statuses(daemon.dicom_port, files[:2]).values()) == {"Success"}
    # Another process holds the write lock longer than busy_timeout_ms
    # (SQLite docs lang_transaction.html: EXCLUSIVE blocks other writers).
    holder = sqlite3.connect(daemon.database, isolation_level=None, timeout=10)
    holder.execute("BEGIN EXCLUSIVE")
    mark = daemon.mark()
    try:
        statuses = storescu_statuses(daemon.dicom_port, files[2:5])
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    daemon.allow_errors_since(mark)
    assert set(statuses.values()) == {REFUSED}, statuses
    assert_nothing_false(daemon, statuses, rows)
    # released: the same objects now succeed (the sender's retry)
    assert set(storescu_statuses(daemon.dicom_port, files[2:5]).values()) == {"Success"}
    assert {rows[f]["sop_instance_uid"] for f in files[:5]} <= stored_uids(daemon)


@pytest.fixture
def small_fs(tmp_path):
    """An 8 MiB ext4 image mounted on tmp_path/fs; unmounted afterwards."""
    if os.geteuid() != 0:
        pytest.skip("loop mount needs root")
    image, mount = tmp_path / "fs.img", tmp_path / "fs"
    mount.mkdir()
    subprocess.run(["truncate", "-s", "8M", str(image)], check=True)
    # -m 0: no blocks reserved for root (the daemon runs as root here)
    subprocess.run(["mkfs.ext4", "-q", "-m", "0", str(image)], check=True)
    result = run(["mount", "-o", "loop", str(image), str(mount)], env=None)
    if result.returncode != 0:
        pytest.skip("cannot loop-mount in this sandbox: " + result.stderr.strip())
    yield str(mount)
    subprocess.run(["umount", "-l", str(mount)])


def fs_daemon(daemon_factory, name, mount):
    daemon = daemon_factory(name, storage=dict(data_directory=mount))
    daemon.data_directory = mount
    daemon.database = os.path.join(mount, "mitilog.sqlite3")
    return daemon


def fill(mount):
    """Fills the filesystem; returns the filler's path."""
    path = os.path.join(mount, "filler")
    with open(path, "wb", buffering=0) as f:  # unbuffered: ENOSPC shows here
        for size in (65536, 4096, 512):
            try:
                while True:
                    f.write(b"\0" * size)
            except OSError:
                pass
    return path


@pytest.mark.sqlite_only("fills the file system that holds the SQLite file")
def test_disk_full_answers_a700_then_recovers(daemon_factory, sim, small_fs):
    files, rows = sim
    daemon = fs_daemon(daemon_factory, "full", small_fs).start()
    assert set(storescu_statuses(daemon.dicom_port, files[:3]).values()) == {"Success"}
    filler = fill(small_fs)
    mark = daemon.mark()
    statuses = storescu_statuses(daemon.dicom_port, files[3:40])
    daemon.allow_errors_since(mark)
    assert_nothing_false(daemon, statuses, rows)
    refused = [f for f, s in statuses.items() if s != "Success"]
    # design rule: a full disk gives A700 (PS3.4 B.2.3 Out of Resources)
    assert refused and {statuses[f] for f in refused} == {REFUSED}, statuses
    os.unlink(filler)  # space returns
    again = storescu_statuses(daemon.dicom_port, files[3:40])
    assert set(again.values()) == {"Success"}, again
    assert {rows[f]["sop_instance_uid"] for f in files[:40]} <= stored_uids(daemon)
    with daemon.db() as db:
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]


def test_read_only_data_directory_refuses_to_start(daemon_factory, small_fs):
    # A filesystem cannot be remounted read-only while the daemon holds the
    # database open for writing (the kernel answers EBUSY), so the
    # read-only case is the start: serve must say so and exit non-zero.
    daemon = fs_daemon(daemon_factory, "ro", small_fs)
    subprocess.run(["mount", "-o", "remount,ro", small_fs], check=True)
    result = run([BINARY, "serve", "--config", daemon.config], timeout=30)
    subprocess.run(["mount", "-o", "remount,rw", small_fs], check=True)
    # common practice, no source: a daemon that cannot write its data exits non-zero
    assert result.returncode != 0
    assert "read-only" in result.stderr.lower() or "cannot" in result.stderr.lower(), result.stderr
