"""Access control: DICOM TLS (with and without client certificates), the
HTTP non-loopback refusal, the privilege drop. Test CA made with openssl
in the test's folder."""

import os
import subprocess
import tempfile
import time

import pytest

from conftest import AE_TITLE, BINARY, DCMTK_ENV, run

ENV = dict(DCMTK_ENV, ASAN_OPTIONS=os.environ.get("ASAN_OPTIONS", ""))


def openssl(*args, cwd):
    subprocess.run(["openssl"] + list(args), cwd=cwd, check=True,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


@pytest.fixture(scope="module")
def pki(tmp_path_factory):
    """ca.crt; server.key/.crt and client.key/.crt signed by it; a
    stranger.key/.crt signed by another CA."""
    d = str(tmp_path_factory.mktemp("pki"))
    for ca in ("ca", "otherca"):
        openssl("req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2",
                "-subj", "/CN=mitilog test %s" % ca, "-keyout", ca + ".key",
                "-out", ca + ".crt", cwd=d)
    for name, ca in (("server", "ca"), ("client", "ca"), ("stranger", "otherca")):
        openssl("req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=" + name,
                "-keyout", name + ".key", "-out", name + ".csr", cwd=d)
        openssl("x509", "-req", "-in", name + ".csr", "-CA", ca + ".crt",
                "-CAkey", ca + ".key", "-CAcreateserial", "-days", "2",
                "-out", name + ".crt", cwd=d)
    return d


def tls_options(pki, who):
    if who is None:
        return ["+tla", "+cf", os.path.join(pki, "ca.crt")]
    return ["+tls", os.path.join(pki, who + ".key"), os.path.join(pki, who + ".crt"),
            "+cf", os.path.join(pki, "ca.crt")]


def tls_echo(daemon, options):
    return run(["echoscu", "-to", "5", "-ta", "5", "-aec", AE_TITLE] + options
               + ["127.0.0.1", str(daemon.dicom_port)], timeout=30)


def start_tls(daemon, pki, who="client", timeout=30):
    """Daemon.start() with a TLS C-ECHO as the readiness check."""
    daemon._out = open(daemon.stdout_path, "ab")
    daemon._err = open(daemon.stderr_path, "ab")
    daemon.process = subprocess.Popen([BINARY, "serve", "--config", daemon.config],
                                      stdout=daemon._out, stderr=daemon._err,
                                      cwd=daemon.workdir, env=ENV)
    deadline = time.monotonic() + timeout
    while tls_echo(daemon, tls_options(pki, who)).returncode != 0:
        assert daemon.process.poll() is None, daemon.log()
        assert time.monotonic() < deadline, daemon.log()
        time.sleep(0.3)
    return daemon


def tls_daemon(daemon_factory, pki, name, require_client):
    keys = dict(tls_certificate=os.path.join(pki, "server.crt"),
                tls_private_key=os.path.join(pki, "server.key"))
    if require_client:
        keys["tls_ca_certificates"] = os.path.join(pki, "ca.crt")
    daemon = daemon_factory(name, dicom=keys)
    # a refused handshake is logged as an error by design
    daemon.allowed_error_patterns.append(r"TLS|handshake|association request")
    return daemon


def test_tls_with_client_certificates_required(daemon_factory, pki, fixtures):
    daemon = start_tls(tls_daemon(daemon_factory, pki, "tlsreq", True), pki)
    good = [f["path"] for f in fixtures["manifest"] if f["group"] != "bad"][:1]
    ok = daemon.storescu(good, options=tls_options(pki, "client"))
    # PS3.15 B.1 (TLS secure transport): the client certificate signed by
    # the configured CA is accepted
    assert ok.returncode == 0, ok.stderr
    # no certificate, a certificate of another CA, or no TLS at all: refused
    assert tls_echo(daemon, tls_options(pki, None)).returncode != 0
    stranger = ["+tls", os.path.join(pki, "stranger.key"),
                os.path.join(pki, "stranger.crt"), "+cf", os.path.join(pki, "ca.crt")]
    assert tls_echo(daemon, stranger).returncode != 0
    assert tls_echo(daemon, []).returncode != 0
    assert tls_echo(daemon, tls_options(pki, "client")).returncode == 0


def test_tls_without_client_certificates(daemon_factory, pki):
    daemon = start_tls(tls_daemon(daemon_factory, pki, "tlsopen", False), pki, who=None)
    assert tls_echo(daemon, tls_options(pki, None)).returncode == 0
    # storescu verifies the server: without the CA it refuses (-rc default)
    assert tls_echo(daemon, ["+tla"]).returncode != 0
    assert tls_echo(daemon, []).returncode != 0


def test_tls_key_without_certificate_is_a_config_error(daemon_factory, pki):
    daemon = daemon_factory("tlsbad", dicom=dict(tls_private_key=os.path.join(pki, "server.key")))
    result = run([BINARY, "check-config", daemon.config])
    assert result.returncode != 0
    assert "tls_certificate" in result.stderr + result.stdout


def test_http_on_non_loopback_needs_explicit_consent(daemon_factory):
    daemon = daemon_factory("public", http=dict(address="0.0.0.0"))
    result = run([BINARY, "serve", "--config", daemon.config], timeout=30)
    # design rule: refuse to start on a non-loopback address without TLS and
    # authentication unless explicitly told so
    assert result.returncode != 0
    assert "allow_insecure_non_loopback" in result.stderr, result.stderr
    allowed = daemon_factory("public2", http=dict(address="0.0.0.0",
                                                  allow_insecure_non_loopback="yes"))
    allowed.start()


def proc_ids(pid):
    with open("/proc/%d/status" % pid) as f:
        fields = dict(line.split(":", 1) for line in f if ":" in line)
    return [int(x) for x in fields["Uid"].split()], [int(x) for x in fields["Gid"].split()]


@pytest.mark.skipif(os.geteuid() != 0, reason="the privilege drop needs a start as root")
def test_root_start_drops_to_the_service_user(daemon_factory, fixtures):
    import pwd
    nobody = pwd.getpwnam("nobody")
    # the data folder must be reachable by nobody: not under pytest's 0700 tmp
    data = tempfile.mkdtemp(prefix="mitilog-drop-", dir="/tmp")
    os.chmod(data, 0o755)
    daemon = daemon_factory("drop", storage=dict(data_directory=data + "/var"))
    with open(daemon.config, "a") as f:
        f.write("[service]\nuser = nobody\n")
    daemon.data_directory = data + "/var"
    daemon.database = data + "/var/mitilog.sqlite3"
    daemon.start()
    uids, gids = proc_ids(daemon.process.pid)
    # proc(5): real, effective, saved, filesystem ids, all the user's now
    assert uids == [nobody.pw_uid] * 4 and gids == [nobody.pw_gid] * 4
    good = [f["path"] for f in fixtures["manifest"] if f["group"] != "bad"][:3]
    result = daemon.storescu(good)
    assert result.returncode == 0, result.stderr
    if daemon.engine == "sqlite":   # a PostgreSQL store has no file of ours
        assert os.stat(daemon.database).st_uid == nobody.pw_uid
    # umask 077: nothing the daemon made is readable by others
    for root, dirs, files in os.walk(daemon.data_directory):
        for name in dirs + files:
            assert os.stat(os.path.join(root, name)).st_mode & 0o077 == 0, name


@pytest.mark.skipif(os.geteuid() != 0, reason="needs a start as root")
def test_unknown_service_user_refuses_to_start(daemon_factory):
    daemon = daemon_factory("nouser")
    with open(daemon.config, "a") as f:
        f.write("[service]\nuser = no-such-user-mitilog\n")
    result = run([BINARY, "serve", "--config", daemon.config], timeout=30)
    assert result.returncode != 0
    assert "not a known user" in result.stderr, result.stderr
