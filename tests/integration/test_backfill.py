"""mitilog backfill against a real Query/Retrieve SCP: DCMTK's dcmqrscp,
started on 127.0.0.1 with a configuration written here and filled with
storescu first, plus a minimal SCP of our own for a C-FIND failure status.

reference: DICOM PS3.4 Annex C (Query/Retrieve: Study Root C-FIND at
STUDY, SERIES and IMAGE level, C-GET with storage sub-operations on the
same association, C-MOVE to a destination AE), PS3.7 section 9.1 (DIMSE
statuses), and `man dcmqrscp` for the SCP's configuration file.
"""

import json
import os
import re
import shutil
import signal
import socket
import struct
import subprocess
import threading
import time

import pytest

from conftest import (AE_TITLE, BINARY, DCMTK_ENV, REPO, Daemon, database_errors, echoscu,
                      free_port, run)
from rawscu import _command, _item, _parse_command, read_pdu

PACS_AE = "ARCHIVE"
DAY = "2026-11-02"
BROWSER_DIR = os.path.join(REPO, "tests", "browser")
OUT_DIR = os.path.join(REPO, "tests", "out")

# Columns that say when a row was written, not what was received.
INSTANCE_CLOCK_COLUMNS = {"id", "received_at", "first_received_at"}
EXAM_CLOCK_COLUMNS = {"updated_at"}


@pytest.fixture(scope="module")
def studies(tmp_path_factory):
    """Three small studies of the simulated department's first day: folders
    of Part 10 files (the simulator's own files, as a modality sent them)."""
    out = tmp_path_factory.mktemp("simulated")
    made = run([BINARY, "simulate", "--out", str(out), "--days", "1", "--matrix", "8x8"],
               timeout=300)
    assert made.returncode == 0, made.stderr
    day = out / DAY
    folders = sorted((len(os.listdir(day / name)), name) for name in os.listdir(day))
    chosen = [str(day / name) for _, name in folders[:3]]
    files = [os.path.join(folder, f) for folder in chosen for f in sorted(os.listdir(folder))]
    fourth = str(day / folders[3][1])
    return dict(folders=chosen, files=files,
                fourth=[os.path.join(fourth, f) for f in sorted(os.listdir(fourth))])


class Pacs:
    """One dcmqrscp: AE ARCHIVE, an index folder in tmp, -v log (a line
    "Store SCU RQ" per storage sub-operation it sends)."""

    def __init__(self, workdir, destinations=(), options=()):
        self.workdir = str(workdir)
        os.makedirs(os.path.join(self.workdir, "archive"), exist_ok=True)
        self.port = free_port()
        self.config = os.path.join(self.workdir, "dcmqrscp.cfg")
        hosts = "".join("peer%d = (%s, 127.0.0.1, %d)\n" % (i, ae, port)
                        for i, (ae, port) in enumerate(destinations))
        with open(self.config, "w") as f:
            f.write("NetworkTCPPort = %d\nMaxPDUSize = 16384\nMaxAssociations = 8\n"
                    "HostTable BEGIN\n%sHostTable END\nVendorTable BEGIN\nVendorTable END\n"
                    "AETable BEGIN\n%s %s RW (200, 1024mb) ANY\nAETable END\n"
                    % (self.port, hosts, PACS_AE, os.path.join(self.workdir, "archive")))
        self.log_path = os.path.join(self.workdir, "dcmqrscp.log")
        self._log = open(self.log_path, "ab")
        self.start(options)

    def start(self, options=()):
        self.process = subprocess.Popen(["dcmqrscp", "-v"] + list(options) + ["-c", self.config],
                                        stdout=self._log, stderr=self._log, env=DCMTK_ENV)
        deadline = time.monotonic() + 20
        while echoscu(self.port, called=PACS_AE).returncode != 0:
            assert self.process.poll() is None, self.log()
            assert time.monotonic() < deadline, self.log()
            time.sleep(0.1)

    def store(self, files):
        sent = run(["storescu", "-aec", PACS_AE, "-aet", "FILLER", "127.0.0.1", str(self.port)]
                   + list(files), timeout=300)
        assert sent.returncode == 0, sent.stderr

    def log(self):
        with open(self.log_path, "rb") as f:
            return f.read().decode("utf-8", "replace")

    def sub_operations(self):
        """Storage sub-operations the PACS has sent so far (dcmqrscp's own
        log, the independent count)."""
        return self.log().count("Store SCU RQ")

    def queries(self):
        return self.log().count("Received Find SCP")

    def restart(self, options=()):
        self.process.terminate()
        self.process.wait(timeout=30)
        self.start(options)

    def stop(self):
        if self.process.poll() is None:
            self.process.terminate()
            self.process.wait(timeout=30)
        self._log.close()


@pytest.fixture
def pacs_factory(tmp_path, studies):
    made = []

    def make(name="pacs", destinations=()):
        pacs = Pacs(tmp_path / name, destinations)
        made.append(pacs)
        pacs.store(studies["files"])
        return pacs

    yield make
    for pacs in made:
        pacs.stop()


def backfill(daemon, pacs, *options, timeout=300):
    return run([BINARY, "backfill", "--config", daemon.config,
                "--from", "%s@127.0.0.1:%d" % (PACS_AE, pacs.port),
                "--since", DAY, "--until", DAY] + list(options), timeout=timeout)


def closed_window():
    """A one-minute backfill window two hours from now (local time):
    surely closed while a test runs."""
    start = time.localtime(time.time() + 2 * 3600)
    if start.tm_min == 59:
        return "%02d:59-%02d:00" % (start.tm_hour, (start.tm_hour + 1) % 24)
    return "%02d:%02d-%02d:%02d" % (start.tm_hour, start.tm_min, start.tm_hour, start.tm_min + 1)


def waiting_backfill(daemon, pacs, window):
    """A backfill started in the background with a window that is closed:
    it holds its turn on the database and waits, asking nothing of the
    PACS. The caller reads its first line and kills it."""
    return subprocess.Popen([BINARY, "backfill", "--config", daemon.config, "--from",
                             "%s@127.0.0.1:%d" % (PACS_AE, pacs.port), "--since", DAY,
                             "--until", DAY, "--window", window],
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
                            env=DCMTK_ENV)


def rows(daemon, table, skip, key):
    with daemon.db() as db:
        cursor = db.execute("SELECT * FROM %s ORDER BY %s" % (table, key))
        names = [d[0] for d in cursor.description]
        return [{n: v for n, v in zip(names, row) if n not in skip} for row in cursor]


def records(daemon):
    return (rows(daemon, "instances", INSTANCE_CLOCK_COLUMNS, "sop_instance_uid"),
            rows(daemon, "exams", EXAM_CLOCK_COLUMNS, "study_instance_uid"))


@pytest.fixture(scope="module")
def direct_records(module_daemon_factory, studies):
    """The reference: the same files sent straight to the daemon by
    storescu under the PACS's AE title, as the PACS does when it forwards
    them (the C-STORE path every backfilled object must match)."""
    daemon = module_daemon_factory("direct")
    daemon.start()
    sent = daemon.storescu(studies["files"], calling=PACS_AE)
    assert sent.returncode == 0, sent.stderr
    daemon.stop()
    return records(daemon)


def study_states(daemon):
    with daemon.db() as db:
        return db.execute("SELECT state, objects_stored, objects_failed FROM backfill_studies "
                          "ORDER BY study_instance_uid").fetchall()


def test_get_stores_what_a_direct_send_stores(daemon_factory, pacs_factory, studies,
                                              direct_records):
    pacs = pacs_factory()
    daemon = daemon_factory("get")
    done = backfill(daemon, pacs, "--rate", "0")
    assert done.returncode == 0, done.stdout + done.stderr
    total = len(studies["files"])
    # PS3.4 C.4.3: every object of the three studies came as a C-STORE
    # sub-operation of the C-GET, once.
    assert pacs.sub_operations() == total
    assert "3 studies found, 3 done" in done.stdout, done.stdout
    assert [s[0] for s in study_states(daemon)] == ["done"] * 3
    assert sum(s[1] for s in study_states(daemon)) == total
    # The records equal those of the same files sent directly (storescu,
    # the reference sender), but for when they were written.
    instances, exams = records(daemon)
    assert len(instances) == total
    assert (instances, exams) == direct_records
    # Run again: every study is done, nothing is fetched.
    again = backfill(daemon, pacs, "--rate", "0")
    assert again.returncode == 0, again.stdout + again.stderr
    assert "3 done by an earlier run" in again.stdout, again.stdout
    assert pacs.sub_operations() == total


def test_move_to_own_listener_and_to_the_daemon(daemon_factory, pacs_factory, studies,
                                                direct_records):
    listener_port = free_port()
    daemon = daemon_factory("move")
    # PS3.4 C.4.2: the PACS opens its own associations to the destination
    # AE; dcmqrscp finds its address in its HostTable.
    pacs = pacs_factory("pacs", destinations=[(AE_TITLE, listener_port)])
    # Two studies at once, each on its own association (the PACS opens a
    # sub-association per C-MOVE to the same listener).
    moved = backfill(daemon, pacs, "--rate", "0", "--retrieve", "move",
                     "--move-listen-port", str(listener_port), "--concurrency", "2")
    assert moved.returncode == 0, moved.stdout + moved.stderr
    assert pacs.sub_operations() == len(studies["files"])
    assert records(daemon) == direct_records
    # The running daemon's receiver as the destination: the command only
    # asks, the daemon stores.
    receiver = daemon_factory("receiver")
    other = pacs_factory("pacs2", destinations=[(AE_TITLE, receiver.dicom_port)])
    receiver.start()
    moved = backfill(receiver, other, "--rate", "0", "--retrieve", "move")
    assert moved.returncode == 0, moved.stdout + moved.stderr
    receiver.stop()
    assert records(receiver) == direct_records
    assert [s[0] for s in study_states(receiver)] == ["done"] * 3


def instance_count(daemon):
    try:
        with daemon.db() as db:
            return db.execute("SELECT count(*) FROM instances").fetchone()[0]
    except database_errors():
        return 0   # not created yet


def test_kill_mid_study_resumes_without_fetching_twice(daemon_factory, pacs_factory, studies,
                                                      direct_records):
    pacs = pacs_factory()
    daemon = daemon_factory("resume")
    total = len(studies["files"])
    # 120 objects a minute: the run is still inside a study when killed.
    process = subprocess.Popen([BINARY, "backfill", "--config", daemon.config, "--from",
                                "%s@127.0.0.1:%d" % (PACS_AE, pacs.port), "--since", DAY,
                                "--until", DAY, "--rate", "120/min"],
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                               env=DCMTK_ENV)
    deadline = time.monotonic() + 120
    while instance_count(daemon) < 8:
        assert process.poll() is None, "the backfill ended before it could be killed"
        assert time.monotonic() < deadline
        time.sleep(0.05)
    process.kill()      # SIGKILL: no clean-up of any kind
    process.wait()
    committed = instance_count(daemon)
    sent_before = pacs.sub_operations()
    assert 8 <= committed < total
    # Objects are answered after their commit: at most the one in flight
    # was sent and not committed.
    assert sent_before - committed in (0, 1)
    with daemon.db() as db:
        states = dict(db.execute("SELECT state, count(*) FROM backfill_studies GROUP BY 1"))
    assert states.get("retrieving") == 1, states
    resumed = backfill(daemon, pacs, "--rate", "0")
    assert resumed.returncode == 0, resumed.stdout + resumed.stderr
    # The second run fetched exactly the instances that were not stored
    # (C-FIND at IMAGE level for the interrupted study, PS3.4 C.4.1.3).
    assert pacs.sub_operations() - sent_before == total - committed
    instances, exams = records(daemon)
    assert len(instances) == total
    assert sum(i["replaced_count"] for i in instances) == 0
    assert (instances, exams) == direct_records


def test_outside_the_window_it_waits_and_says_so(daemon_factory, pacs_factory):
    pacs = pacs_factory()
    daemon = daemon_factory("window")
    window = closed_window()
    process = waiting_backfill(daemon, pacs, window)
    try:
        line = process.stdout.readline()
        # Meanwhile a second backfill on the same database refuses to run
        # (it would fetch the same studies): common practice, no source.
        second = backfill(daemon, pacs)
    finally:
        process.kill()
        process.wait()
    assert second.returncode == 1
    assert "another backfill is running on this database" in second.stderr, second.stderr
    # common practice, no source: the wait is said in words, with the time
    # it ends; nothing is asked of the PACS meanwhile, not even the query.
    assert "outside the backfill window %s (local time): waiting until %s" % (
        window, window[:5]) in line, line
    assert pacs.queries() == 0
    with daemon.db() as db:
        assert db.execute("SELECT state FROM backfill_runs").fetchall() == [("waiting",)]


class FailingFindSCP(threading.Thread):
    """Accepts one association (every context with Implicit VR Little
    Endian, PS3.8 9.3.3) and answers its C-FIND with status A700
    (Refused: Out of Resources, PS3.4 C.4.1.1.4)."""

    def __init__(self):
        super().__init__(daemon=True)
        self.server = socket.socket()
        self.server.bind(("127.0.0.1", 0))
        self.server.listen(1)
        self.port = self.server.getsockname()[1]

    def run(self):
        connection, _ = self.server.accept()
        with connection:
            kind, request = read_pdu(connection)
            assert kind == 0x01
            items, offset = b"", 68
            while offset + 4 <= len(request):
                item_type, _, length = struct.unpack_from(">BBH", request, offset)
                if item_type == 0x20:
                    context = request[offset + 4]
                    items += _item(0x21, struct.pack(">BBBB", context, 0, 0, 0)
                                   + _item(0x40, b"1.2.840.10008.1.2"))
                offset += 4 + length
            body = (struct.pack(">HH", 1, 0) + request[4:36] + b"\0" * 32
                    + _item(0x10, b"1.2.840.10008.3.1.1.1") + items
                    + _item(0x50, _item(0x51, struct.pack(">I", 16384))))
            connection.sendall(struct.pack(">BBI", 0x02, 0, len(body)) + body)
            command = b""
            while True:
                kind, data = read_pdu(connection)
                if kind != 0x04:
                    return
                length, context, header = struct.unpack_from(">IBB", data, 0)
                if header & 0x01:
                    command += data[6:4 + length]
                if header == 0x02:   # last data set fragment: the request is whole
                    break
            fields = _parse_command(command)
            response = _command({
                0x0002: fields[(0, 0x0002)],
                0x0100: struct.pack("<H", 0x8020),
                0x0120: fields[(0, 0x0110)],
                0x0800: struct.pack("<H", 0x0101),
                0x0900: struct.pack("<H", 0xA700),
            })
            pdv = struct.pack(">IBB", len(response) + 2, context, 0x03) + response
            connection.sendall(struct.pack(">BBI", 0x04, 0, len(pdv)) + pdv)
            kind, _ = read_pdu(connection)
            if kind == 0x05:
                connection.sendall(struct.pack(">BBI", 0x06, 0, 4) + b"\0" * 4)


def test_plain_words_for_what_goes_wrong(daemon_factory, pacs_factory):
    daemon = daemon_factory("errors")
    nobody = free_port()
    unreachable = run([BINARY, "backfill", "--config", daemon.config, "--from",
                       "%s@127.0.0.1:%d" % (PACS_AE, nobody), "--since", DAY, "--until", DAY])
    # common practice, no source: exit status 1, the cause and what to check
    assert unreachable.returncode == 1
    assert "cannot reach the PACS %s@127.0.0.1:%d (check the host name and port" % (
        PACS_AE, nobody) in unreachable.stderr, unreachable.stderr
    pacs = pacs_factory()
    # dcmqrscp refuses an association to an AE title it does not have
    # (A-ASSOCIATE-RJ, PS3.8 9.3.4).
    refused = run([BINARY, "backfill", "--config", daemon.config, "--from",
                   "ELSEWHERE@127.0.0.1:%d" % pacs.port, "--since", DAY, "--until", DAY])
    assert refused.returncode == 1
    assert "refused the association: check that it knows mitilog's AE title 'MITILOG'" in \
        refused.stderr, refused.stderr
    failing = FailingFindSCP()
    failing.start()
    failed = run([BINARY, "backfill", "--config", daemon.config, "--from",
                  "%s@127.0.0.1:%d" % (PACS_AE, failing.port), "--since", DAY, "--until", DAY])
    failing.join(timeout=30)
    assert failed.returncode == 1
    assert "answered the C-FIND (studies) with status 0xA700" in failed.stderr, failed.stderr
    # A usage mistake is said before anything is asked.
    usage = run([BINARY, "backfill", "--config", daemon.config, "--from", "ARCHIVE-no-port",
                 "--since", DAY, "--until", DAY])
    assert usage.returncode == 2
    assert "is not AE@HOST:PORT" in usage.stderr


def test_ingest_status_shows_the_backfill(daemon_factory, pacs_factory, studies, tmp_path):
    pacs = pacs_factory()
    daemon = daemon_factory("status")
    daemon.start()
    assert daemon.get_json("/api/v1/ingest")["backfill"] is None
    done = backfill(daemon, pacs, "--rate", "0")
    assert done.returncode == 0, done.stdout + done.stderr
    document = daemon.get_json("/api/v1/ingest")
    b = document["backfill"]
    total = len(studies["files"])
    assert b["source"] == "%s@127.0.0.1:%d" % (PACS_AE, pacs.port)
    assert b["state"] == "finished"
    assert b["run"] == dict(studies_found=3, studies_done=3, studies_failed=0, objects=total)
    assert b["source_totals"]["objects_stored"] == total
    node = shutil.which("node")
    have = node and os.path.exists("/usr/bin/chromium") and os.path.isdir(
        os.path.join(BROWSER_DIR, "node_modules", "playwright-core"))
    if not have:
        if os.environ.get("MITILOG_REQUIRE_BROWSER"):
            pytest.fail("node, /usr/bin/chromium or tests/browser/node_modules missing")
        return
    config_path = os.path.join(str(tmp_path), "backfill_status.json")
    with open(config_path, "w") as f:
        json.dump(dict(url="http://127.0.0.1:%d" % daemon.http_port,
                       out=os.path.join(OUT_DIR, "browser-backfill")), f)
    result = subprocess.run([node, os.path.join(BROWSER_DIR, "backfill_status.mjs"), config_path],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            timeout=180, cwd=BROWSER_DIR)
    lines = [line for line in result.stdout.splitlines() if line.startswith("{")]
    assert lines, result.stderr
    page = json.loads(lines[-1])
    assert not page["errors"], page["errors"]
    # The line as a reader sees it (Chromium's rendering of status.js).
    assert re.search(r"%s@127\.0\.0\.1:%d: finished, 3/3 studies done, 0 failed, %d objects" % (
        PACS_AE, pacs.port, total), page["backfill"]), page["backfill"]


def test_station_is_matched_on_the_retrieved_objects(daemon_factory, pacs_factory, studies,
                                                      direct_records):
    pacs = pacs_factory()
    daemon = daemon_factory("station")
    # Station Name is no study-level key (PS3.4 C.6.2): whole studies
    # are fetched and only the objects of the station are kept.
    kept = [i for i in direct_records[0] if (i["station_name"] or "").startswith("US-ROOM-3")]
    assert 0 < len(kept) < len(direct_records[0])
    done = backfill(daemon, pacs, "--rate", "0", "--station", "US-ROOM-3*")
    assert done.returncode == 0, done.stdout + done.stderr
    assert pacs.sub_operations() == len(studies["files"])
    instances, _ = records(daemon)
    assert instances == kept
    assert "%d skipped" % (len(studies["files"]) - len(kept)) in done.stdout, done.stdout
    # With C-MOVE to the daemon the objects never pass through the
    # command: the filter cannot be applied, which is said at once.
    refused = backfill(daemon, pacs, "--retrieve", "move", "--station", "US-ROOM-3")
    assert refused.returncode == 2
    assert "--station needs objects that pass through this command" in refused.stderr
    # Without the filter, the same studies are not done yet: only the
    # other stations' objects are fetched now.
    sent = pacs.sub_operations()
    rest = backfill(daemon, pacs, "--rate", "0")
    assert rest.returncode == 0, rest.stdout + rest.stderr
    assert pacs.sub_operations() - sent == len(studies["files"]) - len(kept)
    assert records(daemon) == direct_records


def test_check_config_reads_the_backfill_section(tmp_path):
    config = tmp_path / "mitilog.ini"
    config.write_text("[backfill]\nsource = ARCHIVE@pacs:99999\nwindow = nights\n")
    checked = run([BINARY, "check-config", str(config)])
    # common practice, no source: a bad value is named with its section
    # and key, and check-config exits 2
    assert checked.returncode == 2
    assert "[backfill] source: PACS port '99999' is not a number from 1 to 65535" in \
        checked.stderr, checked.stderr
    assert "[backfill] window: time window 'nights' is not HH:MM-HH:MM" in checked.stderr
    config.write_text("[backfill]\nsource = ARCHIVE@pacs:104\nwindow = 20:00-06:00\n")
    checked = run([BINARY, "check-config", str(config)])
    assert "[backfill]" not in checked.stderr, checked.stderr


def test_sigterm_records_the_stop(daemon_factory, pacs_factory):
    pacs = pacs_factory()
    daemon = daemon_factory("sigterm")
    process = subprocess.Popen([BINARY, "backfill", "--config", daemon.config, "--from",
                                "%s@127.0.0.1:%d" % (PACS_AE, pacs.port), "--since", DAY,
                                "--until", DAY, "--rate", "60/min"],
                               stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                               env=DCMTK_ENV)
    deadline = time.monotonic() + 60
    while instance_count(daemon) < 1:
        assert process.poll() is None and time.monotonic() < deadline
        time.sleep(0.05)
    process.send_signal(signal.SIGTERM)
    _, err = process.communicate(timeout=60)
    # common practice, no source: a stopped command says so and exits 1
    assert process.returncode == 1
    assert "interrupted; the same command resumes where it stopped" in err, err
    with daemon.db() as db:
        assert db.execute("SELECT state FROM backfill_runs").fetchall() == [("interrupted",)]
    resumed = backfill(daemon, pacs, "--rate", "0")
    assert resumed.returncode == 0, resumed.stdout + resumed.stderr


def test_a_study_the_pacs_cannot_send_fails_and_the_rest_goes_on(daemon_factory, pacs_factory,
                                                                 studies, tmp_path,
                                                                 direct_records):
    pacs = pacs_factory()
    # A fourth study kept RLE-compressed (dcmcrle, DCMTK's RLE encoder;
    # stored through dcmqrscp started to prefer RLE, +xr). dcmqrscp sends
    # a C-GET sub-operation on the first context accepted for the class
    # and cannot decompress (its log: "unable to convert"), so that
    # study's images fail while the other studies are sent.
    compressed = tmp_path / "rle"
    compressed.mkdir()
    for path in studies["fourth"]:
        target = str(compressed / os.path.basename(path))
        if run(["dcmcrle", path, target]).returncode != 0:
            shutil.copy(path, target)    # an SR: no pixel data to encode
    pacs.restart(["+xr"])
    sent = run(["storescu", "-xr", "-aec", PACS_AE, "-aet", "FILLER", "127.0.0.1",
                str(pacs.port)] + sorted(str(p) for p in compressed.iterdir()), timeout=300)
    assert sent.returncode == 0, sent.stderr
    pacs.restart()
    daemon = daemon_factory("partial")
    done = backfill(daemon, pacs, "--rate", "0")
    # common practice, no source: a failed study makes the run exit 1 and
    # says so; the other studies are done (PS3.4 C.4.3.1.4: failed
    # sub-operations are counted in the final response)
    assert done.returncode == 1, done.stdout + done.stderr
    assert "4 studies found, 3 done, 0 already done before, 1 failed" in done.stdout, done.stdout
    with daemon.db() as db:
        failed = db.execute("SELECT message, attempts FROM backfill_studies "
                            "WHERE state = 'failed'").fetchall()
        done_uids = {r[0] for r in db.execute(
            "SELECT study_instance_uid FROM backfill_studies WHERE state = 'done'")}
    assert len(failed) == 1 and failed[0][1] == 1
    assert "\n" not in failed[0][0] and ("PACS" in failed[0][0] or "not stored" in failed[0][0])
    instances, _ = records(daemon)
    assert done_uids == {i["study_instance_uid"] for i in direct_records[0]}
    assert [i for i in instances if i["study_instance_uid"] in done_uids] == direct_records[0]
    # The next run tries the failed study again, and only that one.
    again = backfill(daemon, pacs, "--rate", "0")
    assert again.returncode == 1
    assert "4 studies found, 0 done, 3 already done before, 1 failed" in again.stdout, again.stdout
    with daemon.db() as db:
        assert db.execute("SELECT attempts FROM backfill_studies WHERE state = 'failed'"
                          ).fetchall() == [(2,)]


def test_a_second_receiver_on_the_same_database_waits_its_turn(daemon_factory, pacs_factory):
    """Two receivers (two configurations, two data folders, as on two
    machines) share one database: while the first one's backfill runs,
    the second one's is refused in plain words, whatever the engine.
    Common practice, no source: one worker per job across a cluster."""
    pacs = pacs_factory()
    first = daemon_factory("first-receiver")
    shared = first.shared_storage()
    second = daemon_factory("second-receiver", storage=shared)
    assert second.data_directory != first.data_directory
    # The first run waits for a closed window: it holds its turn without
    # asking anything of the PACS.
    process = waiting_backfill(first, pacs, closed_window())
    try:
        line = process.stdout.readline()
        assert "outside the backfill window" in line, line
        refused = backfill(second, pacs)
    finally:
        process.kill()
        process.wait()
    assert refused.returncode == 1
    assert "another backfill is running on this database" in refused.stderr, refused.stderr
    assert pacs.queries() == 0
    # Once the first is gone (killed: its lock goes with it), the second runs.
    done = backfill(second, pacs, "--rate", "0")
    assert done.returncode == 0, done.stdout + done.stderr
    assert "3 studies found, 3 done" in done.stdout, done.stdout
