"""The PostgreSQL store under the real daemon: objects sent with storescu
land in PostgreSQL; a re-send replaces, never duplicates; when the server
is killed in the middle of an ingest the objects are answered A700, and
once it is back the receiver recovers by itself with nothing that was
acknowledged lost.

Self-contained: starts its own throw-away server with
tests/postgresql/cluster.sh on a free port (skipped, saying why, when
PostgreSQL's server programs are not installed) and reads it with psql.
"""

import glob
import os
import shutil
import subprocess
import tempfile
import threading
import time

import pytest

from conftest import BINARY, REPO, free_port
from sending import simulated_files, storescu_statuses

CLUSTER = os.path.join(REPO, "tests", "postgresql", "cluster.sh")
# DCMTK 3.6.7 storescu prints status A700 as "Refused: OutOfResources"
# (docs/dcmtk.md); PS3.4 B.2.3: A7xx "Refused: Out of Resources".
REFUSED = "Refused: OutOfResources"


def cluster(command, folder, port=None, attempts=1):
    arguments = ["bash", CLUSTER, command, folder] + ([str(port)] if port else [])
    for attempt in range(attempts):
        result = subprocess.run(arguments, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                text=True, timeout=180)
        if result.returncode == 0:
            break
        # After a SIGKILL of the postmaster its backends take a moment to
        # exit, and PostgreSQL refuses to start while they hold the old
        # shared memory ("another server might be running").
        time.sleep(1)
    assert result.returncode == 0, result.stderr
    return result.stdout.strip()


@pytest.fixture(scope="module")
def server():
    """A PostgreSQL server of this module: (folder, port, conninfo)."""
    if not glob.glob("/usr/lib/postgresql/*/bin/initdb"):
        pytest.skip("PostgreSQL's server programs are not installed "
                    "(deploy/install-dependencies.sh installs them)")
    # Not under pytest's folder: the server runs as the user postgres when
    # the tests run as root, and pytest keeps its folders private (0700).
    folder = tempfile.mkdtemp(prefix="mitilog-postgresql-")
    port = free_port()
    try:
        conninfo = cluster("start", folder, port)
        yield folder, port, conninfo
    finally:
        cluster("stop", folder)
        shutil.rmtree(folder, ignore_errors=True)


def psql(conninfo, sql):
    result = subprocess.run(["psql", "-X", "-q", "-t", "-A", "-v", "ON_ERROR_STOP=1",
                             "-d", conninfo, "-c", sql],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            timeout=60)
    assert result.returncode == 0, result.stderr
    return [line for line in result.stdout.splitlines() if line != ""]


def new_database(server, name):
    """A fresh database sorting text byte by byte, as mitilog needs."""
    _, _, conninfo = server
    psql(conninfo, "DROP DATABASE IF EXISTS %s" % name)
    psql(conninfo, "CREATE DATABASE %s TEMPLATE template0 ENCODING 'UTF8' "
                   "LOCALE 'C.UTF-8'" % name)
    return conninfo.replace("dbname=mitilog", "dbname=" + name)


@pytest.fixture(scope="module")
def sim(tmp_path_factory):
    return simulated_files(BINARY, tmp_path_factory.mktemp("sim"), 1)


def stored(conninfo):
    return dict(row.split("|") for row in psql(
        conninfo, "SELECT sop_instance_uid, replaced_count FROM instances"))


def test_objects_land_and_resending_replaces(daemon_factory, server, sim):
    files, rows = sim
    conninfo = new_database(server, "t_land")
    # The dashboard's reads go through read_connection (here the same
    # server, told apart by its application_name).
    daemon = daemon_factory("land", storage=dict(
        engine="postgresql", connection=conninfo,
        read_connection=conninfo + " application_name=mitilog_reads")).start()
    sent = files[:6]
    statuses = storescu_statuses(daemon.dicom_port, sent)
    assert set(statuses.values()) == {"Success"}, statuses
    # Every acknowledged object is a row, by its SOP Instance UID as the
    # simulator's manifest (an independent record of what was sent) says.
    rows_now = stored(conninfo)
    assert set(rows_now) == {rows[f]["sop_instance_uid"] for f in sent}
    assert set(rows_now.values()) == {"0"}
    # Re-sending replaces (replaced_count 1), never duplicates (design
    # rule of the store; PS3.4 B.4.1 leaves duplicates to the SCP).
    assert set(storescu_statuses(daemon.dicom_port, sent[:3]).values()) == {"Success"}
    rows_now = stored(conninfo)
    assert len(rows_now) == len(sent)
    assert sorted(rows_now[rows[f]["sop_instance_uid"]] for f in sent) == ["0"] * 3 + ["1"] * 3
    assert psql(conninfo, "SELECT count(*) FROM instance_keys") == [str(len(sent))]
    # The health document is read on the read connection, the one session
    # of that name (the writer has none); common practice, no source.
    assert daemon.get("/healthz")[0] == 200
    assert psql(conninfo, "SELECT count(*) FROM pg_stat_activity "
                          "WHERE application_name = 'mitilog_reads'") == ["1"]
    assert psql(conninfo, "SELECT version FROM schema_version") != []


def test_server_killed_mid_ingest_answers_a700_and_recovers(daemon_factory, server, sim):
    files, rows = sim
    folder, port, _ = server
    conninfo = new_database(server, "t_kill")
    daemon = daemon_factory("kill", storage=dict(engine="postgresql",
                                                 connection=conninfo)).start()
    batch = files[:120]
    killed = threading.Event()
    acknowledged_before_kill = []

    def on_status(path, status):
        # After ten acknowledged objects the server is killed (SIGKILL of
        # the postmaster: a crash, not a shutdown).
        if status == "Success" and not killed.is_set():
            acknowledged_before_kill.append(path)
            if len(acknowledged_before_kill) == 10:
                cluster("kill", folder)
                killed.set()

    mark = daemon.mark()
    statuses = storescu_statuses(daemon.dicom_port, batch, on_status=on_status)
    assert killed.is_set(), "the ingest ended before the server was killed"
    # While the server is down every object is refused: A700, so that the
    # modality sends it again later (PS3.4 B.2.3).
    down = storescu_statuses(daemon.dicom_port, files[120:125])
    assert set(down.values()) == {REFUSED}, down
    after_kill = [f for f in batch if f not in acknowledged_before_kill]
    assert REFUSED in {statuses.get(f) for f in after_kill}

    cluster("start", folder, port, attempts=30)
    daemon.allow_errors_since(mark)
    # Back: the receiver connects again by itself, no restart.
    again = storescu_statuses(daemon.dicom_port, files[120:125])
    assert set(again.values()) == {"Success"}, again
    daemon.allow_errors_since(mark)

    # Nothing acknowledged is lost: every Success of the whole run is a
    # row (design rule: acknowledge only after commit).
    present = set(stored(conninfo))
    acknowledged = [f for f, s in list(statuses.items()) + list(again.items())
                    if s == "Success"]
    lost = [f for f in acknowledged if rows[f]["sop_instance_uid"] not in present]
    assert lost == []
    # And the refused ones, sent again (the modality's retry), all land.
    refused = [f for f, s in statuses.items() if s != "Success"]
    assert set(storescu_statuses(daemon.dicom_port, refused).values()) <= {"Success"}
    present = set(stored(conninfo))
    assert {rows[f]["sop_instance_uid"] for f in batch} <= present


def test_check_config_says_whether_the_server_answers(tmp_path, server):
    _, port, _ = server
    conninfo = new_database(server, "t_check")
    good = tmp_path / "good.ini"
    good.write_text("[storage]\ndata_directory = var\nengine = postgresql\n"
                    "connection = %s\n" % conninfo)
    result = subprocess.run([BINARY, "check-config", str(good)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, timeout=60)
    assert result.returncode == 0, result.stderr
    assert "connection answers (PostgreSQL" in result.stdout
    assert "no mitilog schema there yet" in result.stdout
    # A port nobody listens on: exit status 2 and what to check.
    bad = tmp_path / "bad.ini"
    bad.write_text("[storage]\ndata_directory = var\nengine = postgresql\n"
                   "connection = host=127.0.0.1 port=%d dbname=mitilog user=mitilog "
                   "connect_timeout=5\n" % free_port())
    result = subprocess.run([BINARY, "check-config", str(bad)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, timeout=60)
    assert result.returncode == 2
    assert "[storage] connection: cannot connect to PostgreSQL" in result.stderr
    assert "check that the server is running" in result.stderr


def test_three_receivers_start_together_and_share_one_database(daemon_factory, server, sim):
    files, rows = sim
    conninfo = new_database(server, "t_three")
    daemons = [daemon_factory("r%d" % n, storage=dict(engine="postgresql",
                                                      connection=conninfo))
               for n in range(3)]
    # Started at once: each migrates under the advisory lock, so one of
    # them makes the schema and the others find it made.
    threads = [threading.Thread(target=d.start) for d in daemons]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert all(d.process.poll() is None for d in daemons)
    created = sum(d.log().count("PostgreSQL schema created") for d in daemons)
    assert created == 1
    # Each sends the objects of studies of its own (one receiver per
    # site and modality); all land in the one database.
    studies = []
    for f in files:
        if rows[f]["study_instance_uid"] not in studies:
            studies.append(rows[f]["study_instance_uid"])
    mine = [[f for f in files if rows[f]["study_instance_uid"] == studies[n]]
            for n in range(3)]
    results = [None] * 3

    def send(n):
        results[n] = storescu_statuses(daemons[n].dicom_port, mine[n])

    senders = [threading.Thread(target=send, args=(n,)) for n in range(3)]
    for thread in senders:
        thread.start()
    for thread in senders:
        thread.join()
    for statuses in results:
        assert set(statuses.values()) == {"Success"}, statuses
    present = stored(conninfo)
    assert set(present) == {rows[f]["sop_instance_uid"] for f in sum(mine, [])}
