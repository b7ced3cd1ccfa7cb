"""Association negotiation with hostile peers on loopback: connections that
send their A-ASSOCIATE-RQ (or TLS ClientHello) a byte at a time, or never,
do not hold anyone else's association; each address has a limit on
connections still negotiating and each connection a total deadline;
malformed requests are refused before DCMTK parses them; a C-FIND context
is refused in negotiation.

Linux routes all of 127.0.0.0/8 to loopback, so binding a client socket to
127.0.1.N gives each simulated peer its own source address.
"""

import socket
import struct
import threading
import time

import pytest

import rawscu
from conftest import AE_TITLE, echoscu
from test_access import pki, start_tls, tls_daemon, tls_echo, tls_options  # noqa: F401

EXPLICIT_LE = rawscu.EXPLICIT_LE.encode("ascii")
IMPLICIT_LE = b"1.2.840.10008.1.2"
STUDY_ROOT_FIND = "1.2.840.10008.5.1.4.1.2.2.1"


class Dripper(threading.Thread):
    """Connects from source_address and sends data one byte every interval
    seconds until stop() or until the server closes the connection."""

    def __init__(self, port, source_address, data, interval=0.5, first=1):
        super().__init__(daemon=True)
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self.sock.bind((source_address, 0))
        self.sock.settimeout(10)
        self.sock.connect(("127.0.0.1", port))
        self.data, self.interval, self.first = data, interval, first
        self.stopping = threading.Event()
        self.closed_by_server = threading.Event()

    def run(self):
        sent = 0
        try:
            if self.first:
                self.sock.sendall(self.data[:self.first])
                sent = self.first
            while not self.stopping.is_set():
                if self.stopping.wait(self.interval):
                    break
                # the server closing shows as readable-with-EOF (or a reset)
                self.sock.setblocking(False)
                try:
                    if self.sock.recv(4096) == b"":
                        self.closed_by_server.set()
                        return
                except BlockingIOError:
                    pass
                finally:
                    self.sock.setblocking(True)
                    self.sock.settimeout(10)
                if sent < len(self.data):
                    self.sock.sendall(self.data[sent:sent + 1])
                    sent += 1
        except OSError:
            self.closed_by_server.set()

    def stop(self):
        self.stopping.set()
        self.join(timeout=10)
        self.sock.close()


def echo_request():
    return rawscu.associate_request(AE_TITLE, "DRIPPER", [
        (1, rawscu.VERIFICATION.encode("ascii"), [EXPLICIT_LE])])


def threads(daemon):
    with open("/proc/%d/status" % daemon.process.pid) as f:
        return int(next(line for line in f if line.startswith("Threads:")).split()[1])


def wait_for(predicate, bound):
    """Polls predicate for at most bound seconds (a bound on a hang, not a
    measured time)."""
    deadline = time.monotonic() + bound
    while time.monotonic() < deadline:
        if predicate():
            return True
        time.sleep(0.1)
    return predicate()


def test_dripping_peers_do_not_hold_the_listener(daemon_factory):
    # 64 peers, each from its own address (under the per-address limit),
    # drip an A-ASSOCIATE-RQ; the deadline is long so that they are all
    # still negotiating when a legitimate C-ECHO comes
    daemon = daemon_factory("drip", dicom=dict(acse_timeout_seconds=120)).start()
    baseline = threads(daemon)
    drippers = [Dripper(daemon.dicom_port, "127.0.1.%d" % (n + 1), echo_request())
                for n in range(64)]
    try:
        for d in drippers:
            d.start()
        # common practice, no source: each dripper has connected and sent
        # its first byte before the echo
        time.sleep(1.0)
        result = echoscu(daemon.dicom_port)
        # PS3.7 9.1.5: C-ECHO answered Success while 64 peers are mid-request
        assert result.returncode == 0, result.stderr
        still = sum(not d.closed_by_server.is_set() for d in drippers)
        assert still == 64, "the drippers were closed, not isolated: %d open" % still
    finally:
        for d in drippers:
            d.stop()
    assert echoscu(daemon.dicom_port).returncode == 0
    # each negotiating thread ends with its connection (common practice,
    # no source: no thread outlives its peer); bounded wait
    assert wait_for(lambda: threads(daemon) <= baseline, 30), (threads(daemon), baseline)


def test_connections_negotiating_from_one_address_are_limited(daemon_factory):
    daemon = daemon_factory("peraddress", dicom=dict(
        acse_timeout_seconds=120, max_negotiations_per_address=4)).start()
    mark = daemon.mark()
    drippers = [Dripper(daemon.dicom_port, "127.0.0.3", echo_request())
                for _ in range(12)]
    try:
        for d in drippers:
            d.start()
        # the 8 over the limit are closed unread; bounded wait, not a timing
        assert wait_for(lambda: sum(d.closed_by_server.is_set() for d in drippers) >= 8, 30)
        assert sum(not d.closed_by_server.is_set() for d in drippers) == 4
        # another address is not affected
        assert echoscu(daemon.dicom_port).returncode == 0
    finally:
        for d in drippers:
            d.stop()
    assert "max_negotiations_per_address" in daemon.log()[mark:]


def test_negotiation_has_a_total_deadline(daemon_factory):
    # DCMTK's own read timeout restarts with each byte; ours does not
    daemon = daemon_factory("deadline", dicom=dict(acse_timeout_seconds=2)).start()
    dripper = Dripper(daemon.dicom_port, "127.0.0.4", echo_request(), interval=0.3)
    try:
        dripper.start()
        # 2 s deadline; 60 s bound on the wait (the request would drip
        # for ~60 s, so only a total deadline closes it in time)
        assert wait_for(dripper.closed_by_server.is_set, 60)
    finally:
        dripper.stop()
    assert "acse_timeout_seconds" in daemon.log()
    assert echoscu(daemon.dicom_port).returncode == 0


def test_silent_connection_is_closed_at_the_deadline(daemon_factory):
    daemon = daemon_factory("silent", dicom=dict(acse_timeout_seconds=2)).start()
    silent = Dripper(daemon.dicom_port, "127.0.0.5", b"", first=0)
    try:
        silent.start()
        # PS3.8 9.1.4 (ARTIM): a connection that sends nothing is closed;
        # 60 s bound on the wait, the deadline is 2 s
        assert wait_for(silent.closed_by_server.is_set, 60)
    finally:
        silent.stop()
    assert echoscu(daemon.dicom_port).returncode == 0


def test_tls_silent_and_dripping_handshakes_do_not_hold_the_listener(daemon_factory, pki):  # noqa: F811
    daemon = start_tls(tls_daemon(daemon_factory, pki, "tlsdrip", True), pki)
    # TLS 1.2 record header of a handshake message, then its start (RFC 5246
    # 6.2.1, 7.4.1.2): OpenSSL waits for the whole ClientHello
    hello = b"\x16\x03\x01\x00\xc8\x01\x00\x00\xc4\x03\x03" + b"\x42" * 64
    peers = [Dripper(daemon.dicom_port, "127.0.2.%d" % (n + 1), hello)
             for n in range(8)]
    peers += [Dripper(daemon.dicom_port, "127.0.3.%d" % (n + 1), b"", first=0)
              for n in range(8)]
    try:
        for p in peers:
            p.start()
        time.sleep(1.0)
        result = tls_echo(daemon, tls_options(pki, "client"))
        assert result.returncode == 0, result.stderr
    finally:
        for p in peers:
            p.stop()


def malformed_requests():
    """Requests DCMTK 3.6.7 would parse and lose memory on (docs/security.md)."""
    no_transfer = rawscu.associate_request(AE_TITLE, "MALFORMED", [
        (1, rawscu.VERIFICATION.encode("ascii"), [])])
    long_abstract = rawscu.associate_request(AE_TITLE, "MALFORMED", [
        (1, b"1." * 30000, [EXPLICIT_LE])])
    two_abstract = rawscu.associate_request(AE_TITLE, "MALFORMED", [
        (1, None, [EXPLICIT_LE])])
    return {"no transfer syntax": no_transfer, "60 KB abstract syntax": long_abstract,
            "no abstract syntax": two_abstract}


def test_malformed_association_requests_are_refused_before_parsing(daemon_factory):
    # run against build-asan/ too, where LeakSanitizer reports at exit what
    # each of these requests would lose inside DCMTK's parser
    daemon = daemon_factory("malformed").start()
    mark = daemon.mark()
    for name, pdu in malformed_requests().items():
        for _ in range(100):
            with socket.create_connection(("127.0.0.1", daemon.dicom_port), timeout=30) as s:
                s.sendall(pdu)
                pdu_type, payload = rawscu.read_pdu(s)
                # PS3.8 9.3.8: A-ABORT, source 2 (service provider), reason 6
                # (invalid PDU parameter value)
                assert (pdu_type, payload[2:4]) == (0x07, b"\x02\x06"), (name, pdu_type, payload)
    assert echoscu(daemon.dicom_port).returncode == 0
    log = daemon.log()[mark:]
    # refusals are logged, at most one line a second (common practice, no
    # source: a peer in a loop must not flood the log)
    assert 1 <= log.count("refused (A-ABORT)") < 300


def test_c_find_context_is_refused_in_negotiation(daemon_factory):
    daemon = daemon_factory("find").start()
    with socket.create_connection(("127.0.0.1", daemon.dicom_port), timeout=30) as s:
        s.sendall(rawscu.associate_request(AE_TITLE, "FINDSCU", [
            (1, rawscu.VERIFICATION.encode("ascii"), [EXPLICIT_LE]),
            (3, STUDY_ROOT_FIND.encode("ascii"), [EXPLICIT_LE, IMPLICIT_LE])]))
        pdu_type, payload = rawscu.read_pdu(s)
        assert pdu_type == 0x02, (pdu_type, payload)
        results = rawscu.context_results(payload)
        s.sendall(struct.pack(">BBI", 0x05, 0, 4) + b"\0" * 4)
        rawscu.read_pdu(s)
    # PS3.8 9.3.3.2: 0 acceptance; 3 abstract syntax not supported
    assert results == {1: 0, 3: 3}, results
    # and DCMTK's findscu is told so in negotiation, not aborted later
    from conftest import run
    found = run(["findscu", "-S", "-k", "QueryRetrieveLevel=STUDY", "-aec", AE_TITLE,
                 "127.0.0.1", str(daemon.dicom_port)], timeout=60)
    assert "A-ABORT" not in found.stdout + found.stderr, found.stderr


def test_c_find_on_an_accepted_context_is_refused_not_aborted(daemon_factory):
    daemon = daemon_factory("findverify").start()
    mark = daemon.mark()
    assoc = rawscu.Association("127.0.0.1", daemon.dicom_port, AE_TITLE, "FINDSCU",
                               rawscu.VERIFICATION)
    # Query/Retrieve Level (0008,0052) CS "STUDY", explicit VR little endian
    identifier = struct.pack("<HH2sH", 0x0008, 0x0052, b"CS", 6) + b"STUDY "
    status = assoc.c_find_on_context(STUDY_ROOT_FIND, identifier)
    # PS3.7 Annex C: 0122 Refused: SOP Class not supported (a response,
    # where an A-ABORT was sent before)
    assert status == 0x0122
    assoc.release()
    daemon.allow_errors_since(mark)
