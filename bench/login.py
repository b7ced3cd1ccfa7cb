#!/usr/bin/env python3
"""Login reply time: a wrong password for a user of the password file
against a name that is not in it, side by side on one server (HTTPS with a
login, the test CA of tests/integration/test_https.py).

Each round times one request of each kind on kept-alive connections (the
TLS handshake is not timed), from two loopback addresses, then logs in
correctly from both so that the failure counts start again (the throttle
of docs/security.md would otherwise make every later try a 429). Prints
the median of each kind and their ratio; 1.00 means the reply does not
tell whether the name exists. Writes bench/out/login.json.

    /usr/bin/python3 bench/login.py [--rounds 200]   (--tiny: 5 rounds)
"""
import argparse
import base64
import http.client
import json
import os
import ssl
import subprocess
import sys
import tempfile
import time

import benchlib


def make_certificates(folder):
    ca_key, ca = os.path.join(folder, "ca.key"), os.path.join(folder, "ca.pem")
    key, csr = os.path.join(folder, "server.key"), os.path.join(folder, "server.csr")
    certificate = os.path.join(folder, "server.pem")
    extensions = os.path.join(folder, "san.ext")
    with open(extensions, "w") as f:
        f.write("subjectAltName = IP:127.0.0.1\n")
    for command in (
        ["openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2",
         "-subj", "/CN=mitilog bench CA", "-keyout", ca_key, "-out", ca],
        ["openssl", "req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=127.0.0.1",
         "-keyout", key, "-out", csr],
        ["openssl", "x509", "-req", "-in", csr, "-CA", ca, "-CAkey", ca_key,
         "-CAcreateserial", "-days", "2", "-extfile", extensions, "-out", certificate],
    ):
        subprocess.run(command, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return ca, certificate, key


def connect(port, ca, source):
    context = ssl.create_default_context(cafile=ca)
    return http.client.HTTPSConnection("127.0.0.1", port, context=context, timeout=30,
                                       source_address=(source, 0))


def ask(connection, user, password):
    token = base64.b64encode(("%s:%s" % (user, password)).encode()).decode()
    started = time.perf_counter()
    connection.request("GET", "/api/v1/policy", headers={"Authorization": "Basic " + token})
    response = connection.getresponse()
    response.read()
    return response.status, time.perf_counter() - started


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--rounds", type=int, default=200)
    parser.add_argument("--tiny", action="store_true")
    args = parser.parse_args()
    rounds = 5 if args.tiny else args.rounds
    benchlib.require_tools("openssl")
    binary = benchlib.mitilog_binary()
    work = tempfile.mkdtemp(prefix="mitilog-login-")
    benchlib.remove_later(work)
    ca, certificate, key = make_certificates(work)
    line = subprocess.run([binary, "passwd", "lead"], input="tide pool 42\n", text=True,
                          stdout=subprocess.PIPE, check=True).stdout.strip()
    passwords = os.path.join(work, "passwords")
    with open(passwords, "w") as f:
        f.write(line + "\n")
    http_port, dicom_port = benchlib.free_port(), benchlib.free_port()
    config = os.path.join(work, "mitilog.ini")
    with open(config, "w") as f:
        f.write("[dicom]\nport = %d\n[http]\nport = %d\ntls_certificate = %s\n"
                "tls_private_key = %s\npassword_file = %s\n[storage]\ndata_directory = %s\n"
                % (dicom_port, http_port, certificate, key, passwords, os.path.join(work, "var")))
    server = subprocess.Popen([binary, "serve", "--config", config], cwd=work,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                              env=benchlib.ENV)
    try:
        benchlib.wait_for_echo(server, dicom_port, "mitilog serve")
        benchlib.header("Login reply time, wrong password of a known user vs unknown user")
        known_connection = connect(http_port, ca, "127.0.0.2")
        unknown_connection = connect(http_port, ca, "127.0.0.3")
        known, unknown = [], []
        for i in range(rounds):
            tries = [(known_connection, "lead", known), (unknown_connection, "nobody%d" % i, unknown)]
            if i % 2:
                tries.reverse()  # neither kind always goes first
            for connection, user, times in tries:
                status, seconds = ask(connection, user, "wrong %d" % i)
                if status != 401:
                    sys.exit("login: a wrong password for %s got %d, not 401" % (user, status))
                times.append(seconds)
            for connection in (known_connection, unknown_connection):
                status, _ = ask(connection, "lead", "tide pool 42")
                if status != 200:
                    sys.exit("login: the right password got %d, not 200" % status)
        result = dict(binary=binary, rounds=rounds,
                      known_user_wrong_password_ms=benchlib.median(known) * 1000,
                      unknown_user_ms=benchlib.median(unknown) * 1000)
        result["ratio_unknown_to_known"] = (result["unknown_user_ms"]
                                            / result["known_user_wrong_password_ms"])
        benchlib.log("rounds: %d" % rounds)
        benchlib.log("median reply, known user, wrong password: %.1f ms"
                     % result["known_user_wrong_password_ms"])
        benchlib.log("median reply, unknown user:               %.1f ms"
                     % result["unknown_user_ms"])
        benchlib.log("ratio unknown / known:                     %.2f"
                     % result["ratio_unknown_to_known"])
        os.makedirs(benchlib.OUT, exist_ok=True)
        with open(os.path.join(benchlib.OUT, "login.json"), "w") as f:
            json.dump(result, f, indent=2)
    finally:
        server.terminate()
        server.wait(timeout=60)


if __name__ == "__main__":
    main()
