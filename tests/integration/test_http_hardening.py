"""The HTTP side against hostile or careless clients: one parameter checker
for every endpoint (real calendar dates, instants with their offsets, years
in range), slow clients that must not take the API down, libmicrohttpd's
own edge cases, login throttling and the HTTPS profile.

Every client here is a real one on 127.0.0.1 (raw sockets, http.client,
openssl s_client); every wait is bounded."""
import datetime
import http.client
import json
import socket
import time

import pytest

from conftest import BINARY, run


def raw_get(port, target, timeout=10, source="127.0.0.1"):
    """GET over a fresh socket; (status, headers dict, body bytes)."""
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout,
                                            source_address=(source, 0))
    try:
        connection.request("GET", target)
        response = connection.getresponse()
        return response.status, dict(response.getheaders()), response.read()
    finally:
        connection.close()


def error_text(body):
    """The message of the project's error document (docs/api.md: errors are
    {"error": "..."}); fails if the body is anything else."""
    document = json.loads(body)
    assert set(document) == {"error"}, document
    return document["error"]


@pytest.fixture(scope="module")
def served(module_daemon_factory, fixtures):
    """A daemon holding one stored object (sent with DCMTK's storescu)."""
    daemon = module_daemon_factory("parameters")
    daemon.start()
    usable = [f for f in fixtures["manifest"] if f.get("expect", "stored") == "stored"]
    result = daemon.storescu([usable[0]["path"]])
    assert result.returncode == 0, result.stderr
    return daemon


# ---- one parameter checker for every endpoint ---------------------------

# Dates that do not exist in the Gregorian calendar (RFC 3339 5.7: months
# 01-12, day within its month, leap years by Appendix C; 2026 is not one), or
# lie outside the years the API accepts (docs/api.md, "Parameters").
IMPOSSIBLE_DATES = ["2026-02-31", "2026-02-29", "2026-13-45", "2026-04-31",
                    "2026-00-10", "10000-01-01", "0000-01-01", "1899-12-31",
                    "9999-12-31", "2026-1-01", "2026-01-01T00:00"]
DATE_ENDPOINTS = ["/api/v1/findings", "/api/v1/studies", "/api/v1/stats"]


@pytest.mark.parametrize("endpoint", DATE_ENDPOINTS)
@pytest.mark.parametrize("name", ["from", "to"])
def test_impossible_dates_are_refused_everywhere(served, endpoint, name):
    for date in IMPOSSIBLE_DATES:
        status, body = served.get("%s?%s=%s" % (endpoint, name, date))
        assert status == 400, (endpoint, name, date, body)
        assert set(body) == {"error"} and ("parameter %s" % name) in body["error"]
    # Real dates (2024 and 2028 are leap years, RFC 3339 Appendix C) are
    # accepted; both given, so that no default of the other end (the first
    # or last exam day held) can fall outside the period.
    status, body = served.get("%s?from=2024-02-29&to=2028-02-29" % endpoint)
    assert status == 200, body


@pytest.mark.parametrize("endpoint", DATE_ENDPOINTS)
def test_a_period_that_ends_before_it_starts_is_refused(served, endpoint):
    # common practice, no source: an empty period is a client mistake
    status, body = served.get("%s?from=2026-03-02&to=2026-03-01" % endpoint)
    assert status == 400 and "from" in body["error"], body


@pytest.mark.parametrize("endpoint", ["/api/v1/outliers", "/api/v1/drift"])
def test_weeks_with_years_out_of_range_are_refused(served, endpoint):
    # Before: week=9999-W52 answered a period ending "0000-01-02" (the year
    # wrapped). RFC 3339 Appendix A (ISO 8601 week dates): a four-digit
    # year and weeks 01-52/53 (2025 has 52, 2026 has 53).
    for week in ["9999-W52", "9999-W01", "0001-W01", "1899-W10", "2025-W53", "2026-W00"]:
        status, body = served.get("%s?week=%s" % (endpoint, week))
        assert status == 400, (week, body)
        assert "parameter week" in body["error"]
    status, body = served.get("%s?week=2026-W53" % endpoint)  # 2026 has 53 weeks
    assert status == 200, body


def test_since_is_an_instant_with_its_offset(served):
    everything = served.get_json("/api/v1/instances?limit=10")
    assert len(everything) == 1
    received = everything[0]["received_at"]       # e.g. 2026-12-03T09:51:12.345Z
    at = datetime.datetime.strptime(received, "%Y-%m-%dT%H:%M:%S.%fZ").replace(
        tzinfo=datetime.timezone.utc)

    def count(since):
        status, body = served.get("/api/v1/instances?since=" + since.replace("+", "%2B"))
        assert status == 200, (since, body)
        return len(body)

    second = at.replace(microsecond=0)
    # RFC 3339 5.6: "Z" is UTC; the same second without a fraction is the
    # start of that second, so the object received later in it is included
    # (before: "...:12Z" sorted after "...:12.345Z" as text and dropped it).
    assert count(second.strftime("%Y-%m-%dT%H:%M:%SZ")) == 1
    assert count(second.strftime("%Y-%m-%dT%H:%M:%S")) == 1  # no offset: UTC
    # RFC 3339 5.6: "+02:00" is two hours ahead of UTC; 11:51:12+02:00 is
    # 09:51:12Z (before: the offset was ignored and the text compared).
    ahead = second.astimezone(datetime.timezone(datetime.timedelta(hours=2)))
    assert count(ahead.strftime("%Y-%m-%dT%H:%M:%S+02:00")) == 1
    assert count(ahead.strftime("%Y-%m-%dT%H:%M:%S+0200")) == 1
    behind = second.astimezone(datetime.timezone(datetime.timedelta(hours=-5, minutes=-30)))
    assert count(behind.strftime("%Y-%m-%dT%H:%M:%S-05:30")) == 1
    # One millisecond after the receipt, in any offset: nothing.
    later = at + datetime.timedelta(milliseconds=1)
    assert count(later.strftime("%Y-%m-%dT%H:%M:%S.") + "%03dZ" % (later.microsecond // 1000)) == 0
    later_ahead = later.astimezone(datetime.timezone(datetime.timedelta(hours=2)))
    assert count(later_ahead.strftime("%Y-%m-%dT%H:%M:%S.")
                 + "%03d+02:00" % (later_ahead.microsecond // 1000)) == 0
    # At the exact millisecond: included ("at or after", docs/api.md).
    assert count(received) == 1
    # A day-only instant is that day's midnight UTC.
    assert count(at.strftime("%Y-%m-%d")) == 1
    assert count((at + datetime.timedelta(days=1)).strftime("%Y-%m-%d")) == 0


def test_impossible_instants_are_refused(served):
    # RFC 3339 5.6 and 5.7 (months 01-12, hours 00-23, minutes 00-59,
    # offsets hh:mm) and the API's year range.
    for since in ["2026-13-45", "2026-02-30T10:00:00Z", "2026-01-01T24:00:00Z",
                  "2026-01-01T10:60:00Z", "2026-01-01T10:00:61Z", "2026-01-01T10:00+25:00",
                  "2026-01-01T10:00:00ZZ", "2026-01-01T10", "yesterday", "1899-12-31T23:00:00Z",
                  "9999-12-31T23:00:00-02:00", "2026-01-01T10:00:00.Z"]:
        status, body = served.get("/api/v1/instances?since=" + since.replace("+", "%2B"))
        assert status == 400, (since, body)
        assert "parameter since" in error_text(json.dumps(body))


def test_error_documents_keep_one_shape_and_headers(served):
    # docs/api.md: every error is {"error": "..."} as JSON with the common
    # security headers (Content-Security-Policy, nosniff).
    for target, expected in [("/api/v1/findings?limit=0", 400),
                             ("/api/v1/studies/1.2.3", 404),
                             ("/api/v1/nothing", 404),
                             ("/api/v1/instances?study=x", 400)]:
        status, headers, body = raw_get(served.http_port, target)
        assert status == expected, (target, body)
        assert headers["Content-Type"].startswith("application/json")
        assert headers["X-Content-Type-Options"] == "nosniff"
        error_text(body)
    # The message names the parameter and what it may be.
    status, body = served.get("/api/v1/findings?severity=fatal")
    assert status == 400
    assert body["error"] == "parameter severity: one of advisory, warning, violation"
    status, body = served.get("/api/v1/stats?by=colour")
    assert body["error"] == "parameter by: one of exam_type, room, preset, shift, transducer, site"


# ---- slow clients --------------------------------------------------------

class Dribbler:
    """Connections that send a request head one byte at a time, the way a
    slow-headers attack does (common practice, no source)."""
    HEAD = b"GET /healthz HTTP/1.1\r\nHost: x\r\nX-Slow: " + b"a" * 4000

    def __init__(self, port, count, source):
        self.sockets = []
        self.sent = 0
        for _ in range(count):
            s = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
            s.settimeout(2)
            s.bind((source, 0))
            try:
                s.connect(("127.0.0.1", port))
            except OSError:
                s.close()
                continue
            self.sockets.append(s)
        self.step()

    def step(self):
        """One more byte on every connection the server has not closed;
        returns how many are still open."""
        byte = self.HEAD[self.sent:self.sent + 1]
        self.sent += 1
        still = []
        for s in self.sockets:
            try:
                s.send(byte)
                still.append(s)
            except OSError:
                s.close()
        self.sockets = still
        return len(still)

    def close(self):
        for s in self.sockets:
            s.close()


def closed_by_server(s, wait):
    """True when the server closes s (EOF or reset) within wait seconds."""
    s.settimeout(wait)
    try:
        return s.recv(1) == b""
    except socket.timeout:
        return False
    except OSError:
        return True


def closed_by_server_among(sockets, wait):
    """How many of sockets the server closes (EOF or reset): waits up to
    wait seconds for the first, then one more second for any other."""
    import selectors
    selector = selectors.DefaultSelector()
    for s in sockets:
        selector.register(s, selectors.EVENT_READ)
    closed = set()
    deadline = time.monotonic() + wait
    while time.monotonic() < deadline:
        for key, _ in selector.select(timeout=max(0.0, deadline - time.monotonic())):
            try:
                data = key.fileobj.recv(1)
            except OSError:
                data = b""
            if data == b"":
                closed.add(key.fileobj)
                selector.unregister(key.fileobj)
        if closed and deadline - time.monotonic() > 1:
            deadline = time.monotonic() + 1
    selector.close()
    return len(closed)


def healthz_answered(port, source="127.0.0.1", wait=5):
    try:
        status, _, body = raw_get(port, "/healthz", timeout=wait, source=source)
        return status == 200 and b'"status"' in body
    except OSError:
        return False


def test_dribbling_clients_leave_healthz_answered(daemon_factory):
    # Before: 70 dribbling connections filled libmicrohttpd's 64 slots and
    # /healthz got no answer for as long as they dribbled.
    daemon = daemon_factory()  # defaults: 256 connections, 32 per address, 10 s deadline
    daemon.start()
    dribbler = Dribbler(daemon.http_port, 70, "127.0.0.2")
    try:
        answered = 0
        for _ in range(6):
            dribbler.step()
            answered += healthz_answered(daemon.http_port)
            time.sleep(0.5)
        assert answered == 6
        # The slow address was never given more than its 32 connections
        # (fewer once the 10 s deadline has cut them).
        assert dribbler.step() <= 32
    finally:
        dribbler.close()
    daemon.allowed_error_patterns.append(r"http: ")


def test_a_request_must_arrive_whole_within_the_deadline(daemon_factory):
    # Before: each byte restarted libmicrohttpd's idle timeout, so a client
    # sending one byte a second kept its connection for good.
    # Default deadline: 10 s (docs/configuration.md).
    daemon = daemon_factory()
    daemon.start()
    mark = daemon.mark()
    dribbler = Dribbler(daemon.http_port, 1, "127.0.0.1")
    try:
        open_connections = 1
        for _ in range(40):           # 40 bytes over about 20 s
            time.sleep(0.5)
            open_connections = dribbler.step()
            if open_connections == 0:
                break
        assert open_connections == 0, "the server kept a dribbling connection for 20 s"
    finally:
        dribbler.close()
    assert "no whole request within 10 s" in daemon.log()[mark:]
    daemon.allowed_error_patterns.append(r"http: ")  # MHD's note on the closed socket
    # An ordinary request right after is answered.
    assert healthz_answered(daemon.http_port)


def test_one_address_cannot_take_every_slot(daemon_factory):
    daemon = daemon_factory()  # default: 32 connections per address
    daemon.start()
    held = []
    try:
        for _ in range(32):
            s = socket.create_connection(("127.0.0.1", daemon.http_port), timeout=5,
                                         source_address=("127.0.0.2", 0))
            held.append(s)
        extra = socket.create_connection(("127.0.0.1", daemon.http_port), timeout=5,
                                         source_address=("127.0.0.2", 0))
        held.append(extra)
        # One of the 33 from the same address is closed at once: the one the
        # server's threads take last, which is not always the last one
        # connected (each thread of the pool takes connections of its own).
        # The limit is libmicrohttpd's MHD_OPTION_PER_IP_CONNECTION_LIMIT,
        # whose manual says a connection over it is closed at once...
        assert closed_by_server_among(held, 5) == 1
        # ...while another address is served.
        assert healthz_answered(daemon.http_port, source="127.0.0.1")
    finally:
        for s in held:
            s.close()
    daemon.allowed_error_patterns.append(r"http: ")


def test_dribblers_from_the_monitor_address_are_cut_and_healthz_returns(daemon_factory):
    # The monitor and the slow client share 127.0.0.1: the per-address
    # limit then refuses the monitor too, until the deadline frees it.
    daemon = daemon_factory()  # default deadline: 10 s
    daemon.start()
    dribbler = Dribbler(daemon.http_port, 70, "127.0.0.1")
    try:
        answered = False
        for _ in range(30):           # at most about 45 s
            dribbler.step()
            if healthz_answered(daemon.http_port, wait=1):
                answered = True
                break
            time.sleep(0.5)
        assert answered
    finally:
        dribbler.close()
    daemon.allowed_error_patterns.append(r"http: ")


# ---- libmicrohttpd's own edge cases ----------------------------------------

def test_many_parameters_get_an_answer(served):
    # Before: 500 parameters exhausted libmicrohttpd's per-connection memory
    # and the request got no answer (the connection was held 30 s).
    query = "&".join("p%d=%d" % (i, i) for i in range(500))   # 4.4 kB
    status, headers, body = raw_get(served.http_port, "/api/v1/instances?limit=1&" + query)
    assert status == 200, body[:200]
    assert headers["X-Content-Type-Options"] == "nosniff"
    # 2000 of them are more than the 8192 bytes read: a JSON 414, not silence.
    query = "&".join("p%d=%d" % (i, i) for i in range(2000))
    status, headers, body = raw_get(served.http_port, "/api/v1/instances?limit=1&" + query)
    assert status == 414, body[:200]
    error_text(body)
    # As many parameters as 8000 bytes hold (RFC 9110 4.1 recommends
    # supporting targets of at least 8000 octets).
    status, _, body = raw_get(served.http_port, "/api/v1/healthz?" + "a&" * 3980)
    assert status == 404, body[:200]
    error_text(body)
    # 8000 empty parameters would exhaust libmicrohttpd's memory for the
    # connection, which then held it without an answer: now closed at once
    # (sooner than the 10 s request deadline).
    s = socket.create_connection(("127.0.0.1", served.http_port), timeout=5)
    s.sendall(b"GET /healthz?" + b"a&" * 8000 + b" HTTP/1.1\r\nHost: x\r\n\r\n")
    assert closed_by_server(s, 5)
    s.close()
    served.allowed_error_patterns.append(r"http: Failed to send")  # MHD on the closed socket


def test_oversized_targets_and_headers_get_json_errors(served):
    # Before: libmicrohttpd answered these itself with an HTML page and
    # none of the security headers. RFC 9110 15.5.15 (414 URI Too Long),
    # RFC 6585 5 (431 Request Header Fields Too Large).
    status, headers, body = raw_get(served.http_port, "/api/v1/instances?study=" + "1" * 40000)
    assert status == 414
    assert headers["Content-Type"].startswith("application/json")
    assert headers["Content-Security-Policy"].startswith("default-src 'self'")
    assert "request target" in error_text(body)
    connection = http.client.HTTPConnection("127.0.0.1", served.http_port, timeout=10)
    connection.putrequest("GET", "/healthz")
    connection.putheader("X-Padding", "p" * 40000)
    connection.endheaders()
    response = connection.getresponse()
    body = response.read()
    connection.close()
    assert response.status == 431
    assert response.getheader("Content-Type").startswith("application/json")
    assert response.getheader("X-Frame-Options") == "DENY"
    assert "header fields" in error_text(body)


# ---- HTTPS and login -------------------------------------------------------

from test_https import make_certificates, password_line  # noqa: E402


@pytest.fixture
def secured(daemon_factory, tmp_path):
    ca, certificate, key = make_certificates(str(tmp_path))
    passwords = tmp_path / "passwords"
    passwords.write_text(password_line("lead", "tide pool 42") + "\n"
                         + password_line("nurse", "reef 7") + "\n")
    daemon = daemon_factory(http=dict(tls_certificate=certificate, tls_private_key=key,
                                      password_file=str(passwords)))
    daemon.get = lambda path, timeout=10: (200, {})  # start() waits on C-ECHO alone
    daemon.start()
    for _ in range(100):  # then on the HTTPS port, which opens just after
        try:
            socket.create_connection(("127.0.0.1", daemon.http_port), timeout=1).close()
            break
        except OSError:
            time.sleep(0.1)
    daemon.allowed_error_patterns.append(r"http: ")  # failed handshakes and logins
    return daemon, ca


def tls_get(daemon, ca, path, user=None, password=None, source="127.0.0.1"):
    import base64
    import ssl
    context = ssl.create_default_context(cafile=ca)
    connection = http.client.HTTPSConnection("127.0.0.1", daemon.http_port, context=context,
                                             timeout=10, source_address=(source, 0))
    headers = {}
    if user is not None:
        token = base64.b64encode(("%s:%s" % (user, password)).encode()).decode()
        headers["Authorization"] = "Basic " + token  # RFC 7617
    connection.request("GET", path, headers=headers)
    response = connection.getresponse()
    body = response.read()
    connection.close()
    return response.status, dict(response.getheaders()), body


def s_client(port, *options):
    """openssl s_client handshake; True when a session was established."""
    result = run(["openssl", "s_client", "-connect", "127.0.0.1:%d" % port, "-brief"]
                 + list(options), timeout=20, input="")
    return result.returncode == 0 and "Protocol version" in result.stdout + result.stderr


def test_https_profile(secured):
    daemon, ca = secured
    port = daemon.http_port
    # BCP 195 (RFC 9325 3.1.1): TLS 1.0 and 1.1 must not be negotiated. The
    # client is told to offer them (OpenSSL's security level 0), so that a
    # refusal is the server's. Before: both were accepted.
    assert not s_client(port, "-tls1_1", "-cipher", "DEFAULT:@SECLEVEL=0")
    assert not s_client(port, "-tls1", "-cipher", "DEFAULT:@SECLEVEL=0")
    assert s_client(port, "-tls1_2")
    assert s_client(port, "-tls1_3")
    # RFC 9325 4.1/4.2: forward-secret key exchange (ECDHE) and AEAD only.
    assert s_client(port, "-tls1_2", "-cipher", "ECDHE-RSA-AES128-GCM-SHA256")
    assert s_client(port, "-tls1_2", "-cipher", "ECDHE-RSA-AES256-GCM-SHA384")
    assert not s_client(port, "-tls1_2", "-cipher", "AES128-GCM-SHA256")       # RSA key exchange
    assert not s_client(port, "-tls1_2", "-cipher", "ECDHE-RSA-AES128-SHA")    # CBC
    assert not s_client(port, "-tls1_2", "-cipher", "AES256-SHA256")
    # RFC 6797 6.1: HSTS on every HTTPS reply, errors included.
    for path in ("/healthz", "/api/v1/nothing"):
        _, headers, _ = tls_get(daemon, ca, path, "lead", "tide pool 42")
        assert headers.get("Strict-Transport-Security") == "max-age=31536000"
    assert "HTTP on https://127.0.0.1:%d/" % port in daemon.log()


def test_no_hsts_over_plain_http(served):
    # RFC 6797 7.2: a server must not send HSTS over plain HTTP.
    _, headers, _ = raw_get(served.http_port, "/healthz")
    assert "Strict-Transport-Security" not in headers


def test_failed_logins_are_throttled_and_logged(secured):
    daemon, ca = secured
    mark = daemon.mark()
    # Five wrong passwords from one address: 401 each, one log line each.
    for attempt in range(5):
        status, _, _ = tls_get(daemon, ca, "/api/v1/instances?limit=1", "lead", "guess %d" % attempt)
        assert status == 401
    # The sixth try waits, even with the right password (OWASP
    # Authentication Cheat Sheet, "Login Throttling"; RFC 6585 4: 429 with
    # Retry-After). Before: 200.
    status, headers, body = tls_get(daemon, ca, "/api/v1/instances?limit=1", "lead", "tide pool 42")
    assert status == 429, body
    assert int(headers["Retry-After"]) >= 1
    assert "try again" in error_text(body)
    # The same user from another address waits too (per user)...
    status, _, _ = tls_get(daemon, ca, "/api/v1/instances?limit=1", "lead", "tide pool 42",
                           source="127.0.0.2")
    assert status == 429
    # ...another user from another address does not.
    status, _, body = tls_get(daemon, ca, "/api/v1/instances?limit=1", "nurse", "reef 7",
                              source="127.0.0.2")
    assert status == 200, body
    log = daemon.log()[mark:]
    failures = [line for line in log.splitlines() if "login failed for user \"lead\" from 127.0.0.1" in line]
    assert len(failures) == 5, log
    assert "guess" not in log and "tide pool" not in log       # never the password
    assert "login refused for user \"lead\"" in log


def test_unknown_users_are_counted_and_names_escaped(secured):
    daemon, ca = secured
    mark = daemon.mark()
    # A newline in the name must not start a log line of its own.
    status, _, _ = tls_get(daemon, ca, "/api/v1/policy", "ghost\n2026-01-01T00:00:00Z info: forged",
                           "x", source="127.0.0.3")
    assert status == 401
    log = daemon.log()[mark:]
    assert "ghost\\x0a2026" in log
    assert not any(line.startswith("2026-01-01T00:00:00Z info: forged") for line in log.splitlines())
    # Unknown names are throttled like known ones (the reply tells nothing).
    for attempt in range(4):
        status, _, _ = tls_get(daemon, ca, "/api/v1/policy", "ghost%d" % attempt, "x",
                               source="127.0.0.3")
        assert status == 401
    status, _, _ = tls_get(daemon, ca, "/api/v1/policy", "ghost", "x", source="127.0.0.3")
    assert status == 429


def test_check_config_says_what_http_is(tmp_path):
    ca, certificate, key = make_certificates(str(tmp_path))
    passwords = tmp_path / "passwords"
    passwords.write_text(password_line("lead", "x") + "\n")
    path = tmp_path / "m.ini"
    path.write_text("[http]\naddress = 0.0.0.0\ntls_certificate = %s\ntls_private_key = %s\n"
                    "password_file = %s\n" % (certificate, key, passwords))
    result = run([BINARY, "check-config", str(path)])
    assert result.returncode == 0, result.stderr
    # Before: "HTTP has no TLS or login yet" whatever was configured.
    assert "no TLS or login yet" not in result.stdout
    assert "HTTP: https://0.0.0.0:8080/" in result.stdout
    assert "login required (1 users in %s)" % passwords in result.stdout
    path.write_text("[http]\n")
    result = run([BINARY, "check-config", str(path)])
    assert "HTTP: http://127.0.0.1:8080/ (plain HTTP), no login" in result.stdout
