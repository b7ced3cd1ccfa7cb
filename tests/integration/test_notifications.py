"""Notifications of findings: a webhook (a small HTTP receiver started here
on 127.0.0.1 with Python's http.server) and syslog lines (a Unix datagram
socket this test listens on, in place of /dev/log).

Independent checks: the finding is the policy's own (conf/policy.ini,
equipment_maxima: MI above 1.9 is a violation); the object's MI, accession
number, patient name and ID are written here with pydicom; the study key
is recomputed with hashlib (first 8 hex digits of SHA-256 of the UID, as
docs/api.md defines it); the syslog line's priority is computed from RFC
5424 section 6.2.1 (facility local3 = 19, severity warning = 4).
"""
import hashlib
import http.server
import json
import os
import socket
import ssl
import threading
import time

import pydicom
import pytest
from pydicom.uid import generate_uid

from conftest import free_port
from test_https import make_certificates

PATIENT_NAME = "Quillfeather^Imogen"
PATIENT_ID = "PID-55501-X"
ACCESSION = "ACC-NT-0042"
DASHBOARD = "https://mitilog.example.org"
SITE = "Harbourside General (fictional)"


class Receiver:
    """An HTTP receiver on 127.0.0.1 that records each POST and answers
    with the next status of its script (then 200), after delay seconds."""

    def __init__(self, port, script=(), tls=None, delay=0, gate=None):
        self.port, self.script, self.posts = port, list(script), []
        # gate: the first post is held until gate is set; arrived is set
        # when it came
        self.arrived = threading.Event()
        self.lock = threading.Lock()
        receiver = self

        class Handler(http.server.BaseHTTPRequestHandler):
            def do_POST(self):
                body = self.rfile.read(int(self.headers.get("Content-Length", "0")))
                time.sleep(delay)
                if gate is not None and not receiver.arrived.is_set():
                    receiver.arrived.set()
                    gate.wait(120)
                with receiver.lock:
                    status = receiver.script.pop(0) if receiver.script else 200
                    receiver.posts.append((status, self.headers.get("Content-Type"), body))
                self.send_response(status)
                self.send_header("Content-Length", "0")
                self.end_headers()

            def log_message(self, *args):
                pass

        self.server = http.server.ThreadingHTTPServer(("127.0.0.1", port), Handler)
        if tls is not None:  # (certificate, key): HTTPS
            context = ssl.SSLContext(ssl.PROTOCOL_TLS_SERVER)
            context.load_cert_chain(*tls)
            self.server.socket = context.wrap_socket(self.server.socket, server_side=True)
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)
        self.thread.start()

    def stop(self):
        self.server.shutdown()
        self.server.server_close()


def violating_object(source, folder, name, mi, study=None):
    """A copy of a good fixture with an MI above the equipment maximum,
    a new instance UID, an accession number and a named patient."""
    ds = pydicom.dcmread(source)
    ds.SOPInstanceUID = generate_uid()
    ds.file_meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
    if study is not None:
        ds.StudyInstanceUID = study
    ds.MechanicalIndex = mi
    ds.AccessionNumber = ACCESSION
    ds.PatientName = PATIENT_NAME
    ds.PatientID = PATIENT_ID
    path = os.path.join(str(folder), name + ".dcm")
    ds.save_as(path, write_like_original=False)
    return path, str(ds.StudyInstanceUID)


def good_fixture(fixtures):
    for entry in fixtures["manifest"]:
        if entry["group"] == "good" and entry["name"].startswith("us_single"):
            return entry["path"]
    raise AssertionError("no single-frame ultrasound fixture")


def configure(daemon, webhook_port, syslog_path=None, max_attempts=50, scheme="http",
              extra="", timeout=5):
    with open(daemon.config, "a") as f:
        f.write("[notifications]\nwebhook_url = %s://127.0.0.1:%d/hook\n"
                "dashboard_url = %s\nretry_initial_seconds = 1\nretry_max_seconds = 2\n"
                "max_attempts = %d\ntimeout_seconds = %d\n%s"
                % (scheme, webhook_port, DASHBOARD, max_attempts, timeout, extra))
        if syslog_path is not None:
            f.write("syslog = yes\nsyslog_facility = local3\nsyslog_socket = %s\n"
                    % syslog_path)
        f.write("[site]\ninstitution = %s\n" % SITE)


def wait_for(predicate, what, timeout=90):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        value = predicate()
        if value:
            return value
        time.sleep(0.2)
    raise AssertionError("not within %d s: %s" % (timeout, what))


def outbox(daemon):
    with daemon.db() as db:
        return db.execute("SELECT channel, state, attempts, rule_id, severity, last_error, "
                          "study_instance_uid FROM notification_outbox ORDER BY id").fetchall()


def test_webhook_retries_then_delivers_once_and_syslog(daemon_factory, fixtures, tmp_path):
    syslog_path = str(tmp_path / "log.sock")
    listener = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
    listener.bind(syslog_path)
    listener.settimeout(90)
    port = free_port()
    receiver = Receiver(port, script=[500, 500])
    try:
        daemon = daemon_factory()
        configure(daemon, port, syslog_path)
        daemon.start()
        path, study = violating_object(good_fixture(fixtures), tmp_path, "first", "2.5")
        sent = daemon.storescu([path])
        assert sent.returncode == 0, sent.stderr
        rows = wait_for(lambda: [r for r in outbox(daemon) if r[0] == "webhook"
                                 and r[1] == "delivered"], "webhook delivered")
        # two 500s, then the 200: three attempts, delivered once
        assert [status for status, _, _ in receiver.posts] == [500, 500, 200]
        assert rows[0][2] == 3
        assert all(body == receiver.posts[0][2] for _, _, body in receiver.posts)
        assert receiver.posts[-1][1] == "application/json"
        document = json.loads(receiver.posts[-1][2])
        # conf/policy.ini: equipment_maxima, mi_limit 1.9, severity violation
        assert document["rule"] == "equipment_maxima"
        assert document["severity"] == "violation"
        assert document["value"] == 2.5 and document["limit"] == 1.9
        assert document["accession_number"] == ACCESSION
        assert document["study_key"] == hashlib.sha256(study.encode()).hexdigest()[:8]
        assert document["link"] == DASHBOARD + "/exam.html?study=" + study
        assert document["site"] == SITE
        for _, _, body in receiver.posts:
            assert PATIENT_NAME.encode() not in body
            assert b"Quillfeather" not in body and PATIENT_ID.encode() not in body

        line = listener.recv(4096).decode()
        # RFC 5424 6.2.1: PRI = facility local3 (19) * 8 + warning (4)
        assert line.startswith("<156>"), line
        assert "mitilog[" in line and "ALARA violation: rule equipment_maxima" in line
        assert "value=2.5" in line and "accession=" + ACCESSION in line
        assert "Quillfeather" not in line and PATIENT_ID not in line
        wait_for(lambda: [r for r in outbox(daemon) if r[0] == "syslog" and r[1] == "delivered"],
                 "syslog delivered")

        # A second object of the same exam with a higher MI: the exam is
        # evaluated again and its finding rewritten (value 2.6), but the
        # same finding is not queued again.
        second, _ = violating_object(good_fixture(fixtures), tmp_path, "second", "2.6", study)
        sent = daemon.storescu([second])
        assert sent.returncode == 0, sent.stderr

        def rewritten():
            with daemon.db() as db:
                return db.execute("SELECT count(*) FROM findings WHERE study_instance_uid = ? "
                                  "AND rule_id = 'equipment_maxima' AND superseded = 0 "
                                  "AND measured_value = 2.6", (study,)).fetchone()[0]
        wait_for(rewritten, "the finding re-evaluated with the second object")
        rows = outbox(daemon)
        assert sorted((r[0], r[4]) for r in rows) == [("syslog", "violation"),
                                                      ("webhook", "violation")]
        assert len([s for s, _, _ in receiver.posts if s == 200]) == 1
    finally:
        receiver.stop()
        listener.close()


def test_receiver_down_does_not_hold_ingest_and_delivers_after_restart(daemon_factory, fixtures,
                                                                      tmp_path):
    port = free_port()  # nothing listens there yet
    daemon = daemon_factory()
    configure(daemon, port)
    daemon.start()
    path, study = violating_object(good_fixture(fixtures), tmp_path, "down", "2.4")
    sent = daemon.storescu([path])
    # the C-STORE was answered Success although the webhook is down
    assert sent.returncode == 0, sent.stderr
    with daemon.db() as db:
        assert db.execute("SELECT count(*) FROM instances WHERE study_instance_uid = ?",
                          (study,)).fetchone()[0] == 1
    failed = wait_for(lambda: [r for r in outbox(daemon) if r[2] >= 1], "a failed attempt")
    assert failed[0][1] == "pending" and failed[0][5]  # the reason is recorded
    # Stopped while pending: the row waits in the database.
    daemon.stop()
    daemon.returncode = None  # started again below
    receiver = Receiver(port)
    try:
        daemon.start()
        wait_for(lambda: [r for r in outbox(daemon) if r[1] == "delivered"], "delivered")
        assert len(receiver.posts) == 1
        assert json.loads(receiver.posts[0][2])["study_instance_uid"] == study
    finally:
        receiver.stop()


def test_given_up_after_max_attempts_is_recorded(daemon_factory, fixtures, tmp_path):
    port = free_port()
    receiver = Receiver(port, script=[500] * 10)
    try:
        daemon = daemon_factory()
        configure(daemon, port, max_attempts=2)
        daemon.start()
        path, _ = violating_object(good_fixture(fixtures), tmp_path, "refused", "2.2")
        assert daemon.storescu([path]).returncode == 0
        rows = wait_for(lambda: [r for r in outbox(daemon) if r[1] == "failed"], "given up")
        assert rows[0][2] == 2 and "500" in rows[0][5]
        assert len(receiver.posts) == 2  # no third attempt
        assert "given up after 2 attempts" in daemon.log()
    finally:
        receiver.stop()


def test_https_webhook_is_verified(daemon_factory, fixtures, tmp_path):
    # A receiver whose certificate no trusted CA signed is refused (the
    # row waits, its reason recorded); with the CA given by
    # webhook_ca_certificates the same receiver is trusted (RFC 6125
    # host name check against the certificate's IP 127.0.0.1).
    ca, certificate, key = make_certificates(str(tmp_path))
    port = free_port()
    receiver = Receiver(port, tls=(certificate, key))
    try:
        untrusted = daemon_factory("untrusted")
        configure(untrusted, port, scheme="https")
        untrusted.start()
        path, _ = violating_object(good_fixture(fixtures), tmp_path, "tls", "2.3")
        assert untrusted.storescu([path]).returncode == 0
        rows = wait_for(lambda: [r for r in outbox(untrusted) if r[2] >= 1], "an attempt")
        assert rows[0][1] == "pending" and "certificate" in rows[0][5].lower(), rows
        assert receiver.posts == []

        trusted = daemon_factory("trusted")
        configure(trusted, port, scheme="https",
                  extra="webhook_ca_certificates = %s\n" % ca)
        trusted.start()
        assert trusted.storescu([path]).returncode == 0
        wait_for(lambda: [r for r in outbox(trusted) if r[1] == "delivered"], "delivered")
        assert len(receiver.posts) == 1
    finally:
        receiver.stop()


def test_two_receivers_on_one_database_post_each_finding_once(daemon_factory, fixtures,
                                                              tmp_path):
    """Two receivers write to one database (one PostgreSQL database, or one
    SQLite file) and both run a sender over the same outbox: every finding
    reaches the webhook once, not once per receiver. Common practice, no
    source: an outbox read by several workers hands each row to one."""
    port = free_port()
    # A slow receiver (2 s per post, longer than a sender's 1 s between
    # passes): while one sender posts a row, the other has surely looked
    # at the outbox again.
    receiver = Receiver(port, delay=2)
    try:
        first = daemon_factory("first")
        shared = first.shared_storage()
        second = daemon_factory("second", storage=shared)
        for daemon in (first, second):
            configure(daemon, port)
            daemon.start()
        studies = []
        for index in range(6):
            daemon = (first, second)[index % 2]
            path, study = violating_object(good_fixture(fixtures), tmp_path,
                                           "shared%d" % index, "2.%d" % (index + 2),
                                           generate_uid())
            assert daemon.storescu([path]).returncode == 0
            studies.append(study)
        rows = wait_for(lambda: (lambda r: len(r) == 6 and all(x[1] == "delivered" for x in r)
                                 and r)([x for x in outbox(first) if x[0] == "webhook"]),
                        "six findings delivered")
        assert sorted(r[6] for r in rows) == sorted(studies)
        # Stopped: no sender is left that could still post a copy.
        second.stop()
        first.stop()
        posted = [json.loads(p[2])["study_instance_uid"] for p in receiver.posts]
        assert sorted(posted) == sorted(studies)
        assert all(r[2] == 1 for r in rows)   # one attempt each
    finally:
        receiver.stop()


def test_a_receiver_killed_mid_delivery_hands_the_finding_back(daemon_factory, fixtures,
                                                               tmp_path):
    """A receiver takes a finding and is killed (SIGKILL) while posting it:
    once its lease ends, a second receiver on the same database posts the
    finding, which is then recorded as delivered after one recorded
    attempt. Common practice, no source: a lease on a taken job."""
    port = free_port()
    gate = threading.Event()
    receiver = Receiver(port, gate=gate)
    try:
        first = daemon_factory("taker")
        shared = first.shared_storage()
        second = daemon_factory("heir", storage=shared)
        for daemon in (first, second):
            configure(daemon, port, timeout=2)
        first.start()
        path, study = violating_object(good_fixture(fixtures), tmp_path, "leased", "2.7",
                                       generate_uid())
        assert first.storescu([path]).returncode == 0
        assert receiver.arrived.wait(90), "the first receiver never posted"
        first.process.kill()           # SIGKILL, mid-delivery: nothing recorded
        first.wait()
        first.process = None           # killed on purpose: no clean exit to check
        gate.set()
        # (read through the first's configuration: the database is the same)
        assert [r[1] for r in outbox(first) if r[0] == "webhook"] == ["pending"]
        second.start()
        rows = wait_for(lambda: [r for r in outbox(first)
                                 if r[0] == "webhook" and r[1] == "delivered"],
                        "delivered by the second receiver", timeout=120)
        assert rows[0][2] == 1 and rows[0][6] == study
        posted = [json.loads(p[2])["study_instance_uid"] for p in receiver.posts]
        assert posted == [study, study]  # the cut post, then the heir's
        assert "delivered" in second.log()
    finally:
        gate.set()
        receiver.stop()
