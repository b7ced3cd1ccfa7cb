"""DICOMweb STOW-RS (POST /dicomweb/studies, PS3.18 section 10.5) against
the real daemon over HTTPS with a password file holding a sender and a
viewer.

Independent checks: the request bodies are built by Python's email
package (MIMEMultipart 'related', RFC 2387) and by hand for curl; the
stored records are compared with those the same files leave when DCMTK's
storescu sends them to a second daemon; the UIDs of the answer are the
ones pydicom reads from the files; the status codes and the answer's
attributes are those PS3.18 section 10.5.3 names.
"""
import base64
import email.policy
import http.client
import io
import json
import os
import socket
import ssl
import subprocess
import time
import urllib.error
import urllib.request
from email.mime.application import MIMEApplication
from email.mime.multipart import MIMEMultipart

import pydicom
import pytest

from conftest import BINARY, Daemon, run
from test_https import make_certificates

SENDER = ("router", "amber kite 4")
VIEWER = ("guest", "quiet tern 3")
STOW = "/dicomweb/studies"
LIMIT_MIB = 1
DICOM_JSON = "application/dicom+json"
# PS3.18 Annex F.2 tags of the Store Instances Response Module (10.5.3.2)
FAILED_SOP_SEQUENCE = "00081198"
REFERENCED_SOP_SEQUENCE = "00081199"
FAILURE_REASON = "00081197"
SOP_CLASS = "00081150"
SOP_INSTANCE = "00081155"
CANNOT_UNDERSTAND = 0xC000  # PS3.4 B.2.3, as PS3.18 10.5.3 uses it


def password_line(user, password, role=None):
    command = [BINARY, "passwd"] + (["--role", role] if role else []) + [user]
    result = subprocess.run(command, input=password + "\n", stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, timeout=30)
    assert result.returncode == 0, result.stderr
    return result.stdout.strip()


def good_files(fixtures, count):
    files = [e for e in fixtures["manifest"]
             if e["group"] == "good" and e["expect"] == "stored"
             and e["name"].startswith("us_")]
    assert len(files) >= count
    return files[:count]


def python_body(parts):
    """(content type, body) from Python's email package: each part
    application/dicom, base64 transfer encoding (RFC 2045 section 6.8)."""
    message = MIMEMultipart("related", type="application/dicom")
    for data in parts:
        message.attach(MIMEApplication(data, "dicom"))
    raw = message.as_bytes(policy=email.policy.HTTP)
    head, _, body = raw.partition(b"\r\n\r\n")
    content_type = message["Content-Type"]
    assert "multipart/related" in content_type and "boundary=" in content_type
    return content_type, body


def binary_body(parts, boundary="mitilog-test-boundary-7f3a"):
    """A body assembled by hand, parts in binary (PS3.18 section 10.5.1.2
    example layout): --boundary, part headers, blank line, bytes."""
    body = b""
    for data in parts:
        body += (b"--" + boundary.encode() + b"\r\nContent-Type: application/dicom\r\n\r\n"
                 + data + b"\r\n")
    body += b"--" + boundary.encode() + b"--\r\n"
    return 'multipart/related; type="application/dicom"; boundary=%s' % boundary, body


@pytest.fixture(scope="module")
def stow(tmp_path_factory):
    work = tmp_path_factory.mktemp("stow")
    ca, certificate, key = make_certificates(str(work))
    passwords = os.path.join(str(work), "passwords")
    with open(passwords, "w") as f:
        f.write(password_line(*SENDER, role="sender") + "\n")
        f.write(password_line(*VIEWER) + "\n")
    daemon = Daemon(work, http=dict(tls_certificate=certificate, tls_private_key=key,
                                    password_file=passwords))
    with open(daemon.config, "a") as f:
        f.write("[dicomweb]\nenabled = yes\nmax_request_megabytes = %d\nmax_parts = 5\n"
                % LIMIT_MIB)
    context = ssl.create_default_context(cafile=ca)

    def get(path, timeout=10):
        status, _, data = request(daemon, context, "GET", path, user=VIEWER)
        return status, data

    daemon.get = get
    daemon.start()
    daemon.ca, daemon.context = ca, context
    yield daemon
    daemon.stop()


def request(daemon, context, method, path, body=None, content_type=None, user=SENDER,
            headers=None):
    connection = http.client.HTTPSConnection("127.0.0.1", daemon.http_port, context=context,
                                             timeout=60)
    sent = dict(headers or {})
    if user is not None:
        sent["Authorization"] = "Basic " + base64.b64encode(
            ("%s:%s" % user).encode()).decode()
    if content_type is not None:
        sent["Content-Type"] = content_type
    connection.request(method, path, body=body, headers=sent)
    response = connection.getresponse()
    data = response.read()
    connection.close()
    return response.status, dict((k.lower(), v) for k, v in response.getheaders()), data


def post_urllib(daemon, content_type, body, user=SENDER):
    token = base64.b64encode(("%s:%s" % user).encode()).decode()
    req = urllib.request.Request("https://127.0.0.1:%d%s" % (daemon.http_port, STOW),
                                 data=body, method="POST",
                                 headers={"Content-Type": content_type,
                                          "Authorization": "Basic " + token,
                                          "Accept": DICOM_JSON})
    try:
        with urllib.request.urlopen(req, context=daemon.context, timeout=60) as response:
            return response.status, response.headers.get("Content-Type"), response.read()
    except urllib.error.HTTPError as e:
        return e.code, e.headers.get("Content-Type"), e.read()


def uids(document, tag):
    items = document.get(tag, {}).get("Value", [])
    return [(item.get(SOP_CLASS, {}).get("Value", [None])[0],
             item.get(SOP_INSTANCE, {}).get("Value", [None])[0]) for item in items]


# Columns that differ between two receipts of the same object by
# design: row ids, receipt times, the sender's AE title (STOW-RS has none).
VOLATILE = {"id", "received_at", "first_received_at", "calling_ae_title", "source_path"}


def instance_rows(daemon, sop_uids):
    with daemon.db() as db:
        db.row_factory = None
        # the table's columns as the engine lists them (a query that
        # returns no row still describes its columns, PEP 249 description)
        columns = [d[0] for d in db.execute("SELECT * FROM instances WHERE 1 = 0").description]
        kept = [c for c in columns if c not in VOLATILE]
        rows = {}
        for uid in sop_uids:
            row = db.execute("SELECT %s FROM instances WHERE sop_instance_uid = ?"
                             % ", ".join(kept), (uid,)).fetchone()
            assert row is not None, uid
            rows[uid] = dict(zip(kept, row))
        return rows


def header_copies(daemon, sop_uids):
    """The data sets of the kept header copies, read by pydicom; the file
    meta information is left out, since a C-STORE receiver writes its own
    (PS3.10 7.1: the implementation that writes the file names itself)."""
    copies = {}
    with daemon.db() as db:
        for uid in sop_uids:
            row = db.execute("SELECT h.bytes FROM instance_headers h JOIN instances i "
                             "ON i.id = h.instance_id WHERE i.sop_instance_uid = ?",
                             (uid,)).fetchone()
            assert row is not None, uid  # retention header keeps a copy
            ds = pydicom.dcmread(io.BytesIO(row[0]))
            copies[uid] = [(element.tag, element.VR, element.value) for element in ds]
    return copies


def test_python_email_body_is_stored_like_storescu(stow, fixtures, daemon_factory):
    entries = good_files(fixtures, 3)
    parts = [open(e["path"], "rb").read() for e in entries]
    content_type, body = python_body(parts)
    status, media_type, data = post_urllib(stow, content_type, body)
    # PS3.18 10.5.3.1: 200 when every instance was stored
    assert status == 200, data
    assert media_type == DICOM_JSON
    document = json.loads(data)
    assert FAILED_SOP_SEQUENCE not in document
    expected = [(str(pydicom.dcmread(e["path"]).SOPClassUID), e["sop_instance_uid"])
                for e in entries]
    assert uids(document, REFERENCED_SOP_SEQUENCE) == expected
    # PS3.18 F.2.2: each attribute carries its VR
    assert document[REFERENCED_SOP_SEQUENCE]["vr"] == "SQ"

    # The same files through the C-STORE path of a second daemon.
    other = daemon_factory("storescu")
    other.start()
    sent = other.storescu([e["path"] for e in entries])
    assert sent.returncode == 0, sent.stderr
    sop_uids = [e["sop_instance_uid"] for e in entries]
    assert instance_rows(stow, sop_uids) == instance_rows(other, sop_uids)
    assert header_copies(stow, sop_uids) == header_copies(other, sop_uids)


def test_wrong_boundary_is_400(stow, fixtures):
    data = open(good_files(fixtures, 1)[0]["path"], "rb").read()
    content_type, body = binary_body([data], boundary="one-boundary")
    content_type = content_type.replace("one-boundary", "another-boundary")
    status, _, text = request(stow, stow.context, "POST", STOW, body, content_type)
    assert status == 400 and b"boundary" in text, text


def test_curl_binary_body(stow, fixtures, tmp_path):
    entry = good_files(fixtures, 4)[3]
    content_type, body = binary_body([open(entry["path"], "rb").read()])
    path = tmp_path / "body.bin"
    path.write_bytes(body)
    result = run(["curl", "-sS", "--cacert", stow.ca, "-u", "%s:%s" % SENDER,
                  "-H", "Content-Type: " + content_type, "-H", "Accept: " + DICOM_JSON,
                  "--data-binary", "@" + str(path), "-w", "\n%{http_code}",
                  "https://127.0.0.1:%d%s" % (stow.http_port, STOW)])
    assert result.returncode == 0, result.stderr
    text, _, code = result.stdout.rpartition("\n")
    assert code == "200", result.stdout
    document = json.loads(text)
    assert [uid for _, uid in uids(document, REFERENCED_SOP_SEQUENCE)] == [
        entry["sop_instance_uid"]]
    with stow.db() as db:
        assert db.execute("SELECT count(*) FROM instances WHERE sop_instance_uid = ?",
                          (entry["sop_instance_uid"],)).fetchone()[0] == 1


def test_mixed_body_answers_202_with_failed_sequence(stow, fixtures):
    entry = good_files(fixtures, 5)[4]
    not_dicom = b"this is a plain text note, not a DICOM object\n" * 20
    content_type, body = binary_body([open(entry["path"], "rb").read(), not_dicom])
    mark = stow.mark()
    status, headers, data = request(stow, stow.context, "POST", STOW, body, content_type)
    stow.allow_errors_since(mark)
    # PS3.18 10.5.3.1: 202 when some instances were stored and some failed
    assert status == 202, data
    document = json.loads(data)
    assert [uid for _, uid in uids(document, REFERENCED_SOP_SEQUENCE)] == [
        entry["sop_instance_uid"]]
    failed = document[FAILED_SOP_SEQUENCE]["Value"]
    assert len(failed) == 1
    assert failed[0][FAILURE_REASON] == {"vr": "US", "Value": [CANNOT_UNDERSTAND]}
    # the reason in plain words for a person reading the exchange
    assert "part 2" in headers.get("warning", "")


def test_all_failed_answers_409(stow):
    content_type, body = binary_body([b"not DICOM at all"])
    mark = stow.mark()
    status, _, data = request(stow, stow.context, "POST", STOW, body, content_type)
    stow.allow_errors_since(mark)
    assert status == 409, data  # PS3.18 10.5.3.1: no instance stored
    document = json.loads(data)
    assert REFERENCED_SOP_SEQUENCE not in document
    assert len(document[FAILED_SOP_SEQUENCE]["Value"]) == 1


def test_wrong_media_type_is_415(stow, fixtures):
    data = open(good_files(fixtures, 1)[0]["path"], "rb").read()
    # PS3.18 10.5.1.2: the body must be multipart/related; type names the parts
    for content_type in ("application/dicom", "application/json",
                         'multipart/related; type="application/dicom+xml"; boundary=x',
                         "multipart/form-data; boundary=x"):
        status, _, body = request(stow, stow.context, "POST", STOW, data, content_type)
        assert status == 415, (content_type, body)


def test_login_and_role(stow, fixtures):
    content_type, body = binary_body([open(good_files(fixtures, 1)[0]["path"], "rb").read()])
    status, headers, _ = request(stow, stow.context, "POST", STOW, body, content_type,
                                 user=None)
    assert status == 401  # RFC 7235 3.1: no credentials
    assert headers["www-authenticate"].startswith("Basic")
    status, _, _ = request(stow, stow.context, "POST", STOW, body, content_type,
                           user=("router", "wrong password"))
    assert status == 401
    status, _, data = request(stow, stow.context, "POST", STOW, body, content_type, user=VIEWER)
    assert status == 403 and b"sender" in data
    # a sender reads nothing
    status, _, _ = request(stow, stow.context, "GET", "/api/v1/findings")
    assert status == 403


def test_too_many_parts_is_413(stow, fixtures):
    data = open(good_files(fixtures, 1)[0]["path"], "rb").read()
    content_type, body = binary_body([data] * 6)  # max_parts = 5
    status, _, text = request(stow, stow.context, "POST", STOW, body, content_type)
    assert status == 413, text


def tls_socket(stow):
    raw = socket.create_connection(("127.0.0.1", stow.http_port), timeout=30)
    return stow.context.wrap_socket(raw, server_hostname="127.0.0.1")


def head(stow, content_type, extra):
    token = base64.b64encode(("%s:%s" % SENDER).encode()).decode()
    return ("POST %s HTTP/1.1\r\nHost: 127.0.0.1\r\nAuthorization: Basic %s\r\n"
            "Content-Type: %s\r\n%s\r\n" % (STOW, token, content_type, extra)).encode()


def read_status(sock):
    data = b""
    while b"\r\n" not in data:
        piece = sock.recv(4096)
        if not piece:
            break
        data += piece
    return data.split(b"\r\n", 1)[0]


def test_declared_oversize_is_413_before_the_body(stow):
    # Content-Length of 64 MiB against a 1 MiB limit; only 64 KiB is ever
    # sent, so a reply proves the daemon did not wait for the rest.
    content_type, _ = binary_body([b""])
    with tls_socket(stow) as sock:
        sock.sendall(head(stow, content_type, "Content-Length: %d\r\n" % (64 << 20)))
        sock.sendall(b"x" * 65536)
        assert read_status(sock).startswith(b"HTTP/1.1 413")


def test_chunked_oversize_is_cut_while_reading(stow, fixtures):
    # No length declared (chunked, RFC 9112 7.1): the limit is counted as
    # the body arrives. 4 MiB go out in 64 KiB chunks against 1 MiB and
    # the last chunk is never sent; the daemon closes the connection once
    # the limit is passed (libmicrohttpd takes no reply in mid-body).
    content_type, _ = binary_body([b""])
    mark = stow.mark()
    # libmicrohttpd's own line on the socket closed under it, logged when
    # its thread next looks at the connection (later under a sanitizer)
    stow.allowed_error_patterns.append(
        r"http: Connection socket is closed when reading request due to the error")
    with tls_socket(stow) as sock:
        sock.sendall(head(stow, content_type, "Transfer-Encoding: chunked\r\n"))
        chunk = b"%x\r\n" % 65536 + b"y" * 65536 + b"\r\n"
        cut = False
        try:
            for _ in range((4 * LIMIT_MIB << 20) // 65536):
                sock.sendall(chunk)
            cut = read_status(sock) == b""
        except (BrokenPipeError, ConnectionResetError, ssl.SSLError):
            cut = True  # the daemon stopped reading: what this test wants
        assert cut
    # the line follows the close: wait for it (bounded)
    deadline = time.monotonic() + 30
    while "max_request_megabytes" not in stow.log()[mark:] and time.monotonic() < deadline:
        time.sleep(0.1)
    assert "max_request_megabytes" in stow.log()[mark:]
    # and the next request is served as usual
    content_type, body = binary_body([open(good_files(fixtures, 1)[0]["path"], "rb").read()])
    status, _, data = request(stow, stow.context, "POST", STOW, body, content_type)
    assert status == 200, data
    stow.allow_errors_since(mark)


def test_enabled_without_login_is_a_configuration_error(tmp_path):
    # A sender must sign in: enabling STOW-RS without a password file is
    # refused when the configuration is read (common practice, no source).
    config = tmp_path / "mitilog.ini"
    config.write_text("[storage]\ndata_directory = %s\n[dicomweb]\nenabled = yes\n"
                      % (tmp_path / "var"))
    result = run([BINARY, "check-config", str(config)])
    assert result.returncode == 2, result.stdout + result.stderr
    assert "[dicomweb] enabled" in result.stderr and "password_file" in result.stderr
