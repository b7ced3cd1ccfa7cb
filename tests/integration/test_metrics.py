"""GET /metrics, live: the real daemon receives objects from DCMTK's
storescu (one stored, one refused) and association requests from echoscu
(one accepted, one for another AE title), and the scrape, read with
Python's urllib, must count exactly what this test sent; `promtool check
metrics` (Debian's prometheus package, the format's reference checker)
must accept the body with no lint problem. The findings series are
compared with the database's findings table, read here with Python's
sqlite3. The scrape is open without a login, like /healthz.

Format: the Prometheus text exposition format 0.0.4 ("Exposition
formats" in the Prometheus documentation): Content-Type
text/plain; version=0.0.4; label values escape backslash, quote and line
feed; histogram buckets are cumulative and le="+Inf" equals _count.
"""
import collections
import os
import re
import shutil
import socket
import struct
import subprocess
import sys
import time
import urllib.request

import pytest

from conftest import AE_TITLE, REPO, echoscu, run
from test_https import make_certificates, password_line, request
from test_negotiation import Dripper, echo_request, malformed_requests, wait_for
from test_reading import add_reading_section, learn_profile, wait_until_read, write_screen
from test_store_checks import SC_IMAGE, dataset_bytes
from test_store_checks import store as raw_store

sys.path.insert(0, os.path.join(REPO, "tests", "fixtures"))
import make_fixtures  # noqa: E402  (the fixtures' own writer of US objects)

PROMTOOL = shutil.which("promtool")
SAMPLE_RE = re.compile(r"^([a-zA-Z_:][a-zA-Z0-9_:]*)(?:\{(.*)\})? (\S+)$")
LABEL_RE = re.compile(r'([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\]|\\.)*)"')


def unescape(value):
    # the format's three escapes: \\, \" and \n
    return re.sub(r'\\(.)', lambda m: {"n": "\n"}.get(m.group(1), m.group(1)), value)


def parse(text):
    """{(name, frozenset of (label, value)): float} of every sample line."""
    samples = {}
    for line in text.splitlines():
        if not line or line.startswith("#"):
            continue
        match = SAMPLE_RE.match(line)
        assert match, "not a sample line: %r" % line
        name, labels, value = match.groups()
        pairs = frozenset((k, unescape(v)) for k, v in LABEL_RE.findall(labels or ""))
        samples[(name, pairs)] = float(value)
    return samples


def value(samples, name, **labels):
    return samples.get((name, frozenset(labels.items())))


def scrape(daemon):
    url = "http://127.0.0.1:%d/metrics" % daemon.http_port
    with urllib.request.urlopen(url, timeout=10) as response:
        assert response.status == 200
        content_type = response.headers["Content-Type"]
        body = response.read().decode("utf-8")
    return content_type, body


def promtool_check(body):
    """promtool check metrics on the body: (exit status, its output)."""
    result = subprocess.run([PROMTOOL, "check", "metrics"], input=body,
                            stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                            text=True, timeout=60)
    return result.returncode, result.stdout


def data_set_bytes(path):
    """Bytes of the data set in a Part 10 file: after the 128-byte
    preamble, "DICM" and the File Meta Information group, whose length is
    the value of (0002,0000) (PS3.10 section 7.1)."""
    with open(path, "rb") as f:
        data = f.read()
    assert data[128:132] == b"DICM"
    group, element, vr, length = struct.unpack_from("<HH2sH", data, 132)
    assert (group, element, vr, length) == (2, 0, b"UL", 4)
    (meta_length,) = struct.unpack_from("<I", data, 140)
    return len(data) - (144 + meta_length)


def write_objects(folder):
    """One ultrasound image over the equipment maximum (MI 2.5; the
    shipped policy's equipment_maxima is 1.9) and one whose SOP Instance
    UID has a leading zero in a component (invalid, PS3.5 9.1: refused
    with C000)."""
    good = make_fixtures.make_us("metrics-good", "A", "A", 1,
                                 dict(make_fixtures.VALID_INDICES, mi="2.5"))
    bad = make_fixtures.make_us("metrics-bad", "A", "A", 2, make_fixtures.VALID_INDICES)
    bad.SOPInstanceUID = "1.2.03.4"
    paths = []
    for name, ds in (("good.dcm", good), ("bad.dcm", bad)):
        path = os.path.join(folder, name)
        make_fixtures.write(ds, path, make_fixtures.ExplicitVRLittleEndian)
        paths.append(path)
    return paths


def findings_oracle(daemon):
    """Current findings by (rule, severity), counted here in Python."""
    with daemon.db() as db:
        rows = db.execute("SELECT rule_id, severity, superseded FROM findings").fetchall()
    return collections.Counter((rule, severity) for rule, severity, superseded in rows
                               if superseded == 0)


@pytest.mark.skipif(PROMTOOL is None, reason="promtool (Debian's prometheus) not installed")
def test_metrics_count_what_was_sent(daemon_factory, tmp_path):
    daemon = daemon_factory("metrics")
    with open(daemon.config, "a") as f:
        f.write("[rules]\npolicy = %s\n\n[site]\nrules = %s\n"
                % (os.path.join(REPO, "conf", "policy.ini"),
                   os.path.join(REPO, "conf", "site.ini")))
    daemon.start()
    good, bad = write_objects(str(tmp_path))

    content_type, body = scrape(daemon)
    # Exposition formats: the text format's media type, version 0.0.4
    assert content_type == "text/plain; version=0.0.4; charset=utf-8"
    before = parse(body)
    # no object has arrived yet: no timestamp sample at all, never a 0
    assert not any(name == "mitilog_last_object_received_timestamp_seconds"
                   for name, _ in before)

    sent_at = time.time()
    mark = daemon.mark()
    result = daemon.storescu([good], options=["-xe"])
    assert result.returncode == 0, result.stderr
    result = daemon.storescu([bad], options=["-xe"])
    # storescu reports the failure status (C000) of the refused object
    assert "C000" in result.stdout + result.stderr or result.returncode != 0
    # a C-STORE whose data set is not the class its command announces,
    # sent by the raw client (storescu always sends a file's own class)
    mismatched = dataset_bytes("2.25.93031", sop_class_uid=SC_IMAGE)
    assert raw_store(daemon.dicom_port, "2.25.93031", mismatched) == 0xA900
    refused = echoscu(daemon.dicom_port, called="NOT-MITILOG")
    assert refused.returncode != 0  # the called AE title is not ours
    accepted = echoscu(daemon.dicom_port)
    assert accepted.returncode == 0
    received_by = time.time()
    daemon.allow_errors_since(mark)

    content_type, body = scrape(daemon)
    after = parse(body)

    def delta(name, **labels):
        return value(after, name, **labels) - (value(before, name, **labels) or 0)

    # What this test sent: four associations accepted (two storescu, the
    # raw client, one echoscu), one refused for its called AE title (PS3.8
    # 7.1.1.9), one object answered 0000, one C000 and one A900 (PS3.4
    # B.2.3).
    assert delta("mitilog_associations_accepted_total") == 4
    assert delta("mitilog_associations_refused_total", reason="called_ae_title") == 1
    for reason in ("calling_ae_title", "no_presentation_context", "too_many_associations",
                   "negotiation_limit", "invalid_request", "request_timeout"):
        assert delta("mitilog_associations_refused_total", reason=reason) == 0, reason
    assert delta("mitilog_objects_received_total", status="0000") == 1
    assert delta("mitilog_objects_received_total", status="C000") == 1
    assert delta("mitilog_objects_received_total", status="A900") == 1
    assert delta("mitilog_objects_received_total", status="A700") == 0
    # the data sets went over the wire as they are in their files
    assert delta("mitilog_received_bytes_total") == (
        data_set_bytes(good) + data_set_bytes(bad) + len(mismatched))
    last = value(after, "mitilog_last_object_received_timestamp_seconds")
    # printed to the millisecond (truncated)
    assert sent_at - 0.001 <= last <= received_by

    # The histogram: cumulative buckets in order of le, +Inf last and
    # equal to _count; _count is the objects committed (the one stored).
    buckets = sorted(((float(dict(labels)["le"]), count)
                      for (name, labels), count in after.items()
                      if name == "mitilog_commit_duration_seconds_bucket"))
    assert buckets[-1][0] == float("inf")
    counts = [count for _, count in buckets]
    assert counts == sorted(counts)
    committed = value(after, "mitilog_objects_received_total", status="0000")
    assert value(after, "mitilog_commit_duration_seconds_count") == committed == 1
    assert buckets[-1][1] == committed
    assert value(after, "mitilog_commit_duration_seconds_sum") > 0
    with daemon.db() as db:
        assert db.execute("SELECT count(*) FROM instances").fetchone()[0] == committed

    # the default [receiver] site (docs/sites.md)
    assert value(after, "mitilog_build_info", version=value_of_version(after),
                 site="main") == 1
    start = value(after, "process_start_time_seconds")
    assert start <= sent_at

    # The findings of the stored exam, once its record is rebuilt and
    # evaluated (the exam worker settles first): the series must equal the
    # table's current findings.
    deadline = time.monotonic() + 60
    while not findings_oracle(daemon) and time.monotonic() < deadline:
        time.sleep(0.2)
    oracle = findings_oracle(daemon)
    assert oracle, "the MI 2.5 image made no finding"
    assert ("equipment_maxima", "violation") in oracle
    _, body = scrape(daemon)
    final = parse(body)
    series = {(dict(labels)["rule"], dict(labels)["severity"]): count
              for (name, labels), count in final.items() if name == "mitilog_findings"}
    assert series == oracle
    assert value(final, "mitilog_database_up") == 1
    # the database's size as the engine itself counts it: on SQLite its
    # pages as Python's sqlite3 counts them (PRAGMA page_count and
    # page_size, sqlite.org/pragma.html), on PostgreSQL pg_database_size
    # (PostgreSQL documentation, "Database Object Management Functions");
    # nothing writes now that the exam is evaluated
    with daemon.db() as db:
        if daemon.engine == "postgresql":
            size = db.execute("SELECT pg_database_size(current_database())").fetchone()[0]
        else:
            pages = db.execute("PRAGMA page_count").fetchone()[0]
            page_size = db.execute("PRAGMA page_size").fetchone()[0]
            size = pages * page_size
    assert value(final, "mitilog_database_size_bytes") == size > 0

    # promtool: parsed, and no lint problem (naming, units, _total)
    status, output = promtool_check(body)
    assert status == 0 and output.strip() == "", output


def test_refusals_are_counted_by_reason(daemon_factory):
    """Hostile peers as in test_negotiation.py: three malformed
    association requests (refused with A-ABORT before DCMTK parses them),
    six connections dripping a request from one address with room for four
    (two closed unread), and the four left cut at the 2 s deadline."""
    daemon = daemon_factory("refusals", dicom=dict(
        acse_timeout_seconds=2, max_negotiations_per_address=4)).start()
    mark = daemon.mark()
    before = parse(scrape(daemon)[1])
    for name, pdu in malformed_requests().items():
        with socket.create_connection(("127.0.0.1", daemon.dicom_port), timeout=30) as s:
            s.sendall(pdu)
            s.recv(64)  # the A-ABORT
    drippers = [Dripper(daemon.dicom_port, "127.0.0.3", echo_request(), interval=1.0)
                for _ in range(6)]
    try:
        for dripper in drippers:
            dripper.start()
        # a bound on a hang, not a measured time: all six end at the server
        assert wait_for(lambda: all(d.closed_by_server.is_set() for d in drippers), 60)
    finally:
        for dripper in drippers:
            dripper.stop()
    daemon.allow_errors_since(mark)
    after = parse(scrape(daemon)[1])

    def delta(reason):
        name = "mitilog_associations_refused_total"
        return value(after, name, reason=reason) - value(before, name, reason=reason)

    assert delta("invalid_request") == len(malformed_requests())
    assert delta("negotiation_limit") == 2
    assert delta("request_timeout") == 4
    assert delta("called_ae_title") == 0
    assert (value(after, "mitilog_associations_accepted_total")
            == value(before, "mitilog_associations_accepted_total"))


def test_pixel_reading_is_counted(daemon_factory, tmp_path):
    """Screens of a device with an active profile (tests/fixtures/
    make_screens.py draws them; the profile is learned as in
    test_reading.py): with no reading worker and a queue bounded at 2
    objects, 4 screens leave 2 waiting and 2 refused for a full queue
    (docs/reading.md); after a restart with a worker the 2 waiting are
    read."""
    daemon = daemon_factory("pixels")
    learn_profile(daemon, str(tmp_path))
    add_reading_section(daemon, workers=0, queue_objects=2)
    daemon.start()
    drawn = dict(mi="0.9", tis="0.4", tib="1.2")
    paths = [write_screen(str(tmp_path), "queued_%d" % i, "pixels_only", drawn)
             for i in range(4)]
    result = daemon.storescu(paths, options=["-xe"])
    assert result.returncode == 0, result.stderr
    samples = parse(scrape(daemon)[1])
    assert value(samples, "mitilog_queue_items", queue="pixel_reading") == 2
    assert value(samples, "mitilog_pixel_objects_refused_total", reason="queue_full") == 2
    assert value(samples, "mitilog_pixel_objects_read_total") == 0
    with daemon.db() as db:
        not_read = db.execute("SELECT count(*) FROM screen_readings WHERE state = 'not_read'"
                              ).fetchone()[0]
    assert not_read == 2

    daemon.stop()
    with open(daemon.config) as f:
        text = f.read().replace("workers = 0", "workers = 1")
    with open(daemon.config, "w") as f:
        f.write(text)
    daemon.returncode = None
    daemon.start()
    wait_until_read(daemon, 4)
    samples = parse(scrape(daemon)[1])
    # the two left queued are read after the restart; counters start at 0
    assert value(samples, "mitilog_pixel_objects_read_total") == 2
    assert value(samples, "mitilog_queue_items", queue="pixel_reading") == 0
    assert sum(v for (name, _), v in samples.items()
               if name == "mitilog_pixel_objects_refused_total") == 0


def value_of_version(samples):
    versions = [dict(labels)["version"] for name, labels in samples
                if name == "mitilog_build_info"]
    assert len(versions) == 1
    return versions[0]


def test_metrics_stay_open_when_a_login_is_required(daemon_factory, tmp_path):
    """/metrics follows /healthz: with a password file every other request
    needs a login, these two do not (docs/security.md)."""
    ca, certificate, key = make_certificates(str(tmp_path))
    passwords = tmp_path / "passwords"
    passwords.write_text(password_line("lead", "tide pool 42") + "\n")
    daemon = daemon_factory(http=dict(tls_certificate=certificate, tls_private_key=key,
                                      password_file=str(passwords)))
    daemon.get = lambda path, timeout=10: (200, {})  # the port speaks TLS only
    daemon.start()
    deadline = time.monotonic() + 30
    while True:
        try:
            socket.create_connection(("127.0.0.1", daemon.http_port), timeout=1).close()
            break
        except OSError:
            assert time.monotonic() < deadline, "the HTTPS port never took a connection"
            time.sleep(0.1)
    # RFC 7235: the API without credentials is 401 ...
    status, _, _ = request(daemon.http_port, ca, "/api/v1/instances?limit=1")
    assert status == 401
    # ... while the monitoring paths answer without any
    status, headers, body = request(daemon.http_port, ca, "/metrics")
    assert status == 200
    assert headers["Content-Type"] == "text/plain; version=0.0.4; charset=utf-8"
    assert b"mitilog_associations_accepted_total" in body
    status, _, _ = request(daemon.http_port, ca, "/healthz")
    assert status == 200
    daemon.allowed_error_patterns.append(r"http: ")  # MHD logs failed TLS handshakes


@pytest.mark.skipif(PROMTOOL is None, reason="promtool (Debian's prometheus) not installed")
def test_the_documented_configuration_is_valid(tmp_path):
    """The copy-paste blocks of docs/metrics.md: two scrape configurations
    and a rules file, checked by promtool check config / check rules."""
    with open(os.path.join(REPO, "docs", "metrics.md")) as f:
        blocks = re.findall(r"```yaml\n(.*?)```", f.read(), re.S)
    configs = [b for b in blocks if b.startswith("scrape_configs:")]
    rules = [b for b in blocks if b.startswith("groups:")]
    assert len(configs) == 2 and len(rules) == 1
    rules_path = tmp_path / "mitilog-rules.yml"
    rules_path.write_text(rules[0])
    result = run([PROMTOOL, "check", "rules", str(rules_path)])
    assert result.returncode == 0, result.stdout + result.stderr
    for n, block in enumerate(configs):
        path = tmp_path / ("prometheus-%d.yml" % n)
        path.write_text(block + "rule_files:\n  - %s\n" % rules_path)
        result = run([PROMTOOL, "check", "config", str(path)])
        assert result.returncode == 0, result.stdout + result.stderr


def test_receivers_sharing_a_database_are_told_apart_by_site(daemon_factory):
    """Three receivers of three sites write to one database: each one's
    scrape names its own site in mitilog_build_info, so that a Prometheus
    server scraping all three tells them apart; promtool still finds the
    text clean (Prometheus text exposition format 0.0.4, label syntax)."""
    first = daemon_factory("north")
    shared = first.shared_storage()
    receivers = [first, daemon_factory("south", storage=shared),
                 daemon_factory("east", storage=shared)]
    sites = ["north-wing", "south-wing", "east-clinic"]
    for daemon, site in zip(receivers, sites):
        with open(daemon.config, "a") as f:
            f.write("[receiver]\nsite = %s\n" % site)
        daemon.start()
    for daemon, site in zip(receivers, sites):
        _, body = scrape(daemon)
        samples = parse(body)
        labels = [dict(labels) for name, labels in samples if name == "mitilog_build_info"]
        assert [l["site"] for l in labels] == [site], body
        assert value(samples, "mitilog_build_info", version=labels[0]["version"],
                     site=site) == 1
        status, output = promtool_check(body)
        assert status == 0 and output.strip() == "", output
