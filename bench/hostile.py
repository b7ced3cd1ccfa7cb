#!/usr/bin/python3
"""What hostile DICOM peers cost mitilog serve, measured on loopback.

1. C-ECHO round trip (echoscu, wall time) alone, then while 64 peers, each
   from its own loopback address, drip an A-ASSOCIATE-RQ one byte every
   0.5 s: median and worst of --echoes echoes each, side by side. The same
   with DICOM TLS and required client certificates, half the peers silent
   and half dripping a ClientHello.
2. Resident memory over --requests malformed association requests (a
   presentation context without a transfer syntax, then one with a 60 KB
   abstract syntax, alternately), sampled every tenth of the run.
3. Peak memory while one object of --object-mb MB arrives with
   max_object_bytes = --limit-mb MB: VmHWM of the process and the largest
   memory file (memfd) seen, sampled every 10 ms.

    /usr/bin/python3 bench/hostile.py                 # 100,000 requests, 400 MB
    /usr/bin/python3 bench/hostile.py --tiny          # seconds, for CI
    MITILOG=/path/to/other/mitilog /usr/bin/python3 bench/hostile.py

Nothing is asserted: the figures go to docs/security.md.
"""
import argparse
import os
import socket
import statistics
import struct
import subprocess
import sys
import threading
import time

import benchlib

VERIFICATION = b"1.2.840.10008.1.1"
EXPLICIT_LE = b"1.2.840.10008.1.2.1"
US_IMAGE = b"1.2.840.10008.5.1.4.1.1.6.1"


def item(kind, payload):
    return struct.pack(">BBH", kind, 0, len(payload)) + payload


def associate_rq(contexts, calling=b"HOSTILE"):
    """A-ASSOCIATE-RQ (PS3.8 9.3.2); contexts: (id, abstract, [transfer])."""
    body = struct.pack(">HH", 1, 0) + benchlib.AE_TITLE.encode().ljust(16) \
        + calling.ljust(16) + b"\0" * 32 + item(0x10, b"1.2.840.10008.3.1.1.1")
    for pcid, abstract, transfers in contexts:
        sub = struct.pack(">BBBB", pcid, 0, 0, 0) + item(0x30, abstract)
        sub += b"".join(item(0x40, t) for t in transfers)
        body += item(0x20, sub)
    body += item(0x50, item(0x51, struct.pack(">I", 16384))
                 + item(0x52, b"2.25.118394021554683941003217620184093811205"))
    return struct.pack(">BBI", 1, 0, len(body)) + body


def status(pid):
    fields = {}
    with open("/proc/%d/status" % pid) as f:
        for line in f:
            key, _, value = line.partition(":")
            fields[key] = value.strip()
    return fields


def kb(pid, key):
    return int(status(pid)[key].split()[0])


def echo_seconds(port):
    start = time.monotonic()
    ok = subprocess.run(["echoscu", "-ta", "10", "-to", "10", "-aec", benchlib.AE_TITLE,
                         "127.0.0.1", str(port)], env=benchlib.ENV,
                        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL).returncode == 0
    return time.monotonic() - start, ok


def drip(port, address, data, stop):
    """Sends data a byte every 0.5 s (nothing, for empty data) until stop."""
    s = socket.socket()
    try:
        s.bind((address, 0))
        s.connect(("127.0.0.1", port))
        for byte in data:
            if stop.wait(0.5):
                break
            s.send(bytes([byte]))
        stop.wait()
    except OSError:
        pass
    finally:
        s.close()


def latency(binary, echoes, drippers):
    server = benchlib.Mitilog(binary, dicom_extra=dict(acse_timeout_seconds=120)).start()
    try:
        alone = [echo_seconds(server.port) for _ in range(echoes)]
        stop = threading.Event()
        threads = [threading.Thread(target=drip, daemon=True, args=(
            server.port, "127.0.1.%d" % (n + 1), associate_rq([(1, VERIFICATION, [EXPLICIT_LE])]),
            stop)) for n in range(drippers)]
        for t in threads:
            t.start()
        time.sleep(2)
        crowded = [echo_seconds(server.port) for _ in range(echoes)]
        stop.set()
        for t in threads:
            t.join()
    finally:
        server.close()
    for name, runs in (("alone", alone), ("%d drippers" % drippers, crowded)):
        times = [t for t, _ in runs]
        print("C-ECHO %-12s median %.3f s, worst %.3f s, %d/%d answered"
              % (name, statistics.median(times), max(times), sum(ok for _, ok in runs), len(runs)))


def make_pki(folder):
    """A CA, and a server and a client certificate it signed (openssl)."""
    def openssl(*args):
        subprocess.run(["openssl"] + list(args), cwd=folder, check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    openssl("req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2", "-subj",
            "/CN=bench ca", "-keyout", "ca.key", "-out", "ca.crt")
    for name in ("server", "client"):
        openssl("req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=" + name,
                "-keyout", name + ".key", "-out", name + ".csr")
        openssl("x509", "-req", "-in", name + ".csr", "-CA", "ca.crt", "-CAkey", "ca.key",
                "-CAcreateserial", "-days", "2", "-out", name + ".crt")


def tls_echo_seconds(port, pki):
    start = time.monotonic()
    ok = subprocess.run(["echoscu", "-ta", "10", "-to", "10", "+tls",
                         os.path.join(pki, "client.key"), os.path.join(pki, "client.crt"),
                         "+cf", os.path.join(pki, "ca.crt"), "-aec", benchlib.AE_TITLE,
                         "127.0.0.1", str(port)], env=benchlib.ENV,
                        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL).returncode == 0
    return time.monotonic() - start, ok


def tls_latency(binary, echoes, peers):
    """TLS with required client certificates: half the peers silent, half
    dripping a ClientHello (RFC 5246 6.2.1 record header, then its start)."""
    import tempfile
    pki = tempfile.mkdtemp(prefix="mitilog-bench-pki-")
    make_pki(pki)
    server = benchlib.Mitilog(binary, dicom_extra=dict(
        acse_timeout_seconds=120, tls_certificate=os.path.join(pki, "server.crt"),
        tls_private_key=os.path.join(pki, "server.key"),
        tls_ca_certificates=os.path.join(pki, "ca.crt")))
    server._err = open(server.stderr_path, "wb")
    server.process = subprocess.Popen([binary, "serve", "--config", server.config],
                                      env=benchlib.ENV, stdout=subprocess.DEVNULL,
                                      stderr=server._err)
    try:
        deadline = time.monotonic() + 30
        while not tls_echo_seconds(server.port, pki)[1]:
            if time.monotonic() > deadline:
                raise RuntimeError("TLS server does not answer")
            time.sleep(0.2)
        alone = [tls_echo_seconds(server.port, pki) for _ in range(echoes)]
        hello = b"\x16\x03\x01\x00\xc8\x01\x00\x00\xc4\x03\x03" + b"\x42" * 64
        stop = threading.Event()
        threads = [threading.Thread(target=drip, daemon=True, args=(
            server.port, "127.0.4.%d" % (n + 1), hello if n % 2 else b"\0" * 0, stop))
            for n in range(peers)]
        for t in threads:
            t.start()
        time.sleep(2)
        crowded = [tls_echo_seconds(server.port, pki) for _ in range(echoes)]
        stop.set()
        for t in threads:
            t.join()
    finally:
        server.close()
        benchlib.remove_later(pki)
    for name, runs in (("alone", alone), ("%d peers" % peers, crowded)):
        times = [t for t, _ in runs]
        print("TLS C-ECHO %-9s median %.3f s, worst %.3f s, %d/%d answered"
              % (name, statistics.median(times), max(times), sum(ok for _, ok in runs), len(runs)))


def leak(binary, requests):
    server = benchlib.Mitilog(binary).start()
    pid = server.process.pid
    kinds = [associate_rq([(1, VERIFICATION, [])]),
             associate_rq([(1, b"1." * 30000, [EXPLICIT_LE])])]
    samples = [(0, kb(pid, "VmRSS"))]
    try:
        for n in range(1, requests + 1):
            with socket.create_connection(("127.0.0.1", server.port), timeout=30) as s:
                s.sendall(kinds[n % 2])
                try:
                    while s.recv(4096):
                        pass
                except OSError:
                    pass
            if n % max(1, requests // 10) == 0:
                samples.append((n, kb(pid, "VmRSS")))
        ok = benchlib.echo(server.port)
    finally:
        server.close()
    print("malformed requests: VmRSS " + ", ".join("%d: %d kB" % s for s in samples))
    print("malformed requests: growth %+d kB over %d requests; C-ECHO after: %s"
          % (samples[-1][1] - samples[1][1], requests, "answered" if ok else "NOT answered"))


def memory_file_bytes(pid):
    seen = {}
    folder = "/proc/%d/fd" % pid
    for name in os.listdir(folder):
        try:
            if os.readlink(os.path.join(folder, name)).startswith("/memfd:"):
                info = os.stat(os.path.join(folder, name))
                seen[info.st_ino] = info.st_blocks * 512
        except OSError:
            pass
    return sum(seen.values())


def big_object(binary, object_mb, limit_mb):
    server = benchlib.Mitilog(binary, level="info", dicom_extra=dict(
        max_object_bytes=limit_mb * 1024 * 1024)).start()
    pid = server.process.pid
    before = kb(pid, "VmHWM")
    peak_file = [0]
    stop = threading.Event()

    def sample():
        while not stop.is_set():
            peak_file[0] = max(peak_file[0], memory_file_bytes(pid))
            time.sleep(0.01)

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    answer = b""
    try:
        s = socket.create_connection(("127.0.0.1", server.port), timeout=60)
        s.sendall(associate_rq([(1, US_IMAGE, [EXPLICIT_LE])], calling=b"BIG"))
        s.recv(65536)

        def element(tag_element, value):
            return struct.pack("<HHI", 0, tag_element, len(value)) + value
        fields = [element(0x0002, US_IMAGE + b"\0"), element(0x0100, struct.pack("<H", 1)),
                  element(0x0110, struct.pack("<H", 1)), element(0x0700, struct.pack("<H", 0)),
                  element(0x0800, struct.pack("<H", 0)), element(0x1000, b"2.25.7777\0")]
        command = b"".join(fields)
        command = element(0x0000, struct.pack("<I", len(command))) + command
        s.sendall(struct.pack(">BBII", 4, 0, len(command) + 6, len(command) + 2)
                  + bytes([1, 3]) + command)
        total = object_mb * 1024 * 1024
        head = struct.pack("<HH2sHI", 0x7FE0, 0x0010, b"OB", 0, total - 12)
        chunk = 16372
        data = head + b"\0" * (chunk - len(head))
        sent = 0
        while sent < total:
            piece = data[:min(chunk, total - sent)]
            last = sent + len(piece) >= total
            s.sendall(struct.pack(">BBII", 4, 0, len(piece) + 6, len(piece) + 2)
                      + bytes([1, 2 if last else 0]) + piece)
            sent += len(piece)
            data = b"\0" * chunk
        answer = b""
        while b"\x00\x00\x00\x09" not in answer:
            piece = s.recv(65536)
            if not piece:
                break
            answer += piece
        s.close()
    except OSError as error:
        print("object of %d MB: %s\n%s" % (object_mb, error, server.log_tail()))
    finally:
        stop.set()
        sampler.join()
        after = kb(pid, "VmHWM")
        server.close()
    code = answer.find(b"\x00\x00\x00\x09")
    print("object of %d MB, max_object_bytes %d MB: VmHWM %d kB before, %d kB after; "
          "largest memory file seen %d kB; response %s"
          % (object_mb, limit_mb, before, after, peak_file[0] // 1024,
             answer[code + 8:code + 10][::-1].hex() if code >= 0 else "none"))


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--echoes", type=int, default=20)
    parser.add_argument("--drippers", type=int, default=64)
    parser.add_argument("--requests", type=int, default=100000)
    parser.add_argument("--object-mb", type=int, default=400)
    parser.add_argument("--limit-mb", type=int, default=10)
    parser.add_argument("--tiny", action="store_true")
    args = parser.parse_args()
    if args.tiny:
        args.echoes, args.drippers, args.requests = 3, 4, 200
        args.object_mb, args.limit_mb = 8, 1
    benchlib.require_tools("echoscu")
    binary = benchlib.mitilog_binary()
    benchlib.header("hostile peers")
    benchlib.log("binary: %s" % binary)
    latency(binary, args.echoes, args.drippers)
    tls_latency(binary, args.echoes, args.drippers)
    leak(binary, args.requests)
    big_object(binary, args.object_mb, args.limit_mb)
    return 0


if __name__ == "__main__":
    sys.exit(main())
