"""HTTPS and login for the HTTP API when it is reachable beyond this
machine: a test CA made with openssl, a password file made with
`mitilog passwd`, and real requests with Python's ssl and urllib."""
import base64
import http.client
import time
import socket
import os
import ssl
import subprocess

import pytest

from conftest import BINARY, run


def make_certificates(folder):
    """A CA and a server certificate for 127.0.0.1 (openssl req/x509)."""
    ca_key, ca = os.path.join(folder, "ca.key"), os.path.join(folder, "ca.pem")
    key, csr = os.path.join(folder, "server.key"), os.path.join(folder, "server.csr")
    certificate = os.path.join(folder, "server.pem")
    extensions = os.path.join(folder, "san.ext")
    with open(extensions, "w") as f:
        f.write("subjectAltName = IP:127.0.0.1\n")
    for command in (
        ["openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2",
         "-subj", "/CN=mitilog test CA", "-keyout", ca_key, "-out", ca],
        ["openssl", "req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=127.0.0.1",
         "-keyout", key, "-out", csr],
        ["openssl", "x509", "-req", "-in", csr, "-CA", ca, "-CAkey", ca_key,
         "-CAcreateserial", "-days", "2", "-extfile", extensions, "-out", certificate],
    ):
        result = run(command)
        assert result.returncode == 0, result.stderr
    return ca, certificate, key


def password_line(user, password):
    result = subprocess.run([BINARY, "passwd", user], input=password + "\n",
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, timeout=30)
    assert result.returncode == 0, result.stderr
    line = result.stdout.strip()
    assert line.startswith(user + ":$y$")  # yescrypt (libxcrypt)
    return line


def request(port, ca, path, user=None, password=None):
    context = ssl.create_default_context(cafile=ca)
    connection = http.client.HTTPSConnection("127.0.0.1", port, context=context,
                                             timeout=10)
    headers = {}
    if user is not None:
        token = base64.b64encode(("%s:%s" % (user, password)).encode()).decode()
        headers["Authorization"] = "Basic " + token  # RFC 7617
    connection.request("GET", path, headers=headers)
    response = connection.getresponse()
    body = response.read()
    connection.close()
    return response.status, dict(response.getheaders()), body


@pytest.fixture
def secured(daemon_factory, tmp_path):
    ca, certificate, key = make_certificates(str(tmp_path))
    passwords = tmp_path / "passwords"
    passwords.write_text("# dashboard users\n" + password_line("lead", "tide pool 42") + "\n")
    daemon = daemon_factory(http=dict(tls_certificate=certificate, tls_private_key=key,
                                      password_file=str(passwords)))
    return daemon, ca


def test_https_with_login(secured):
    daemon, ca = secured
    # conftest's start() polls /healthz over plain HTTP; here the port speaks
    # TLS, so wait on C-ECHO alone and then check over HTTPS.
    daemon.get = lambda path, timeout=10: (200, {})
    daemon.start()
    # The DICOM port answers first: wait until the HTTPS port takes
    # connections too before the first request.
    deadline = time.monotonic() + 30
    while True:
        try:
            socket.create_connection(("127.0.0.1", daemon.http_port), timeout=1).close()
            break
        except OSError:
            assert time.monotonic() < deadline, "the HTTPS port never took a connection"
            time.sleep(0.1)
    # RFC 7235: a protected resource without credentials answers 401 with a
    # challenge naming the scheme.
    status, headers, _ = request(daemon.http_port, ca, "/api/v1/instances?limit=1")
    assert status == 401
    assert headers.get("WWW-Authenticate", "").startswith("Basic")
    status, _, _ = request(daemon.http_port, ca, "/api/v1/instances?limit=1", "lead", "wrong")
    assert status == 401
    status, _, _ = request(daemon.http_port, ca, "/api/v1/instances?limit=1", "nurse",
                           "tide pool 42")
    assert status == 401
    status, headers, body = request(daemon.http_port, ca, "/api/v1/instances?limit=1",
                                    "lead", "tide pool 42")
    assert status == 200 and body.startswith(b"[")
    assert headers["X-Content-Type-Options"] == "nosniff"
    # The health check stays open for monitoring (it shows counts only).
    status, _, body = request(daemon.http_port, ca, "/healthz")
    assert status == 200 and b'"status"' in body
    # Plain HTTP on the TLS port gets no answer (common practice, no source).
    connection = http.client.HTTPConnection("127.0.0.1", daemon.http_port, timeout=5)
    with pytest.raises((http.client.HTTPException, ConnectionError, OSError)):
        connection.request("GET", "/healthz")
        connection.getresponse().read()
    daemon.allowed_error_patterns.append(r"http: ")  # MHD logs the failed TLS handshake


def test_configuration_rules(tmp_path):
    ca, certificate, key = make_certificates(str(tmp_path))
    passwords = tmp_path / "passwords"
    passwords.write_text(password_line("lead", "x") + "\n")

    def check(http_section):
        path = tmp_path / "m.ini"
        path.write_text("[http]\n" + "".join("%s = %s\n" % kv for kv in http_section.items()))
        return run([BINARY, "check-config", str(path)])

    # Beyond loopback with HTTPS and a login: accepted.
    result = check(dict(address="0.0.0.0", tls_certificate=certificate, tls_private_key=key,
                        password_file=passwords))
    assert result.returncode == 0, result.stderr
    # A login over plain HTTP would expose passwords: refused.
    result = check(dict(password_file=passwords))
    assert result.returncode == 2 and "password_file" in result.stderr
    # Beyond loopback without TLS: refused, naming the key.
    result = check(dict(address="0.0.0.0"))
    assert result.returncode == 2 and "[http] address" in result.stderr
    # A certificate without its key: refused.
    result = check(dict(tls_certificate=certificate))
    assert result.returncode == 2 and "tls_private_key" in result.stderr
