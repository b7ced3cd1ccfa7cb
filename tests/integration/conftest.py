"""Black-box harness: starts the real mitilog daemon with a generated
configuration and talks to it the way a modality or PACS would (DCMTK's
echoscu and storescu), then reads the HTTP API and the SQLite file.

Environment:
  MITILOG_BINARY   the executable under test (default: build/mitilog)
"""

import json
import os
import random
import re
import signal
import socket
import sqlite3
import subprocess
import sys
import time
import urllib.error
import urllib.request

import pytest

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
BINARY = os.path.abspath(os.environ.get(
    "MITILOG_BINARY", os.path.join(REPO, "build", "mitilog")))
MAKE_FIXTURES = os.path.join(REPO, "tests", "fixtures", "make_fixtures.py")
AE_TITLE = "MITILOG"

# Senders need Nagle off as well, or one-object-at-a-time DIMSE crawls
# (see docs/dcmtk.md: dcmnet reads TCP_NODELAY at connect).
DCMTK_ENV = dict(os.environ, TCP_NODELAY="1")

# A sanitizer report is never an expected error.
SANITIZER_RE = re.compile(r"(AddressSanitizer|LeakSanitizer|UndefinedBehaviorSanitizer|"
                          r"ThreadSanitizer|runtime error:)")
ERROR_RE = re.compile(r"\berror:", re.IGNORECASE)


HANDED_OUT_PORTS = set()


def free_port():
    """A port for a daemon, below the kernel's ephemeral range: a port the
    kernel hands out (bind to 0) can be taken again by any outgoing
    connection (storescu, echoscu, HTTP clients) before the daemon binds it,
    which made restarts fail with "Address already in use" now and then
    (ip(7): ip_local_port_range). Common practice, no source."""
    try:
        with open("/proc/sys/net/ipv4/ip_local_port_range") as f:
            ephemeral_low = int(f.read().split()[0])
    except (OSError, ValueError, IndexError):
        ephemeral_low = 32768
    low, high = 10000, min(ephemeral_low, 65536) - 1
    generator = random.Random()
    for _ in range(500):
        port = generator.randint(low, high) if high > low else 0
        if port in HANDED_OUT_PORTS:
            continue
        with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
            try:
                s.bind(("127.0.0.1", port))
            except OSError:
                continue
            port = s.getsockname()[1]
        HANDED_OUT_PORTS.add(port)
        return port
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def run(cmd, timeout=120, **kwargs):
    """Runs a command, returns CompletedProcess with text output."""
    return subprocess.run(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                          text=True, errors="replace", timeout=timeout,
                          env=kwargs.pop("env", DCMTK_ENV), **kwargs)


def echoscu(port, called=AE_TITLE, calling="ECHOSCU", timeout=10):
    return run(["echoscu", "-to", "5", "-ta", "5", "-aec", called,
                "-aet", calling, "127.0.0.1", str(port)], timeout=timeout)


LIVE_DAEMONS = []


class Daemon:
    """One mitilog configuration (and, once started, one serve process)."""

    def __init__(self, workdir, dicom=None, http=None, storage=None):
        LIVE_DAEMONS.append(self)
        self.workdir = str(workdir)
        os.makedirs(self.workdir, exist_ok=True)
        self.dicom_port = free_port()
        self.http_port = free_port()
        self.data_directory = os.path.join(self.workdir, "var")
        self.database = os.path.join(self.data_directory, "mitilog.sqlite3")
        sections = {
            "dicom": dict(ae_title=AE_TITLE, port=self.dicom_port,
                          allowed_calling_ae_titles="", max_associations=16,
                          acse_timeout_seconds=5, dimse_timeout_seconds=60,
                          max_pdu_bytes=65536),
            "http": dict(address="127.0.0.1", port=self.http_port),
            "storage": dict(data_directory="var", database="mitilog.sqlite3",
                            retention="header", busy_timeout_ms=5000),
            "log": dict(level="info"),
        }
        sections["dicom"].update(dicom or {})
        sections["http"].update(http or {})
        sections["storage"].update(storage or {})
        self.allowed = sections["dicom"]["allowed_calling_ae_titles"]
        self.config = os.path.join(self.workdir, "mitilog.ini")
        with open(self.config, "w") as f:
            for name, keys in sections.items():
                f.write("[%s]\n" % name)
                for key, value in keys.items():
                    f.write("%s = %s\n" % (key, value))
                f.write("\n")
        self.stdout_path = os.path.join(self.workdir, "serve.stdout")
        self.stderr_path = os.path.join(self.workdir, "serve.stderr")
        self.environment = dict(DCMTK_ENV)   # of the serve process
        self.process = None
        self.returncode = None
        self.stopped_at = None
        self.allowed_error_windows = []   # (start, end) offsets in stderr
        self.allowed_error_patterns = []

    # -- process -----------------------------------------------------------
    def start(self, timeout=30):
        self._out = open(self.stdout_path, "ab")
        self._err = open(self.stderr_path, "ab")
        self.process = subprocess.Popen(
            [BINARY, "serve", "--config", self.config],
            stdout=self._out, stderr=self._err, cwd=self.workdir,
            env=self.environment)
        calling = "ECHOSCU"
        if self.allowed.strip():
            calling = self.allowed.split(",")[0].split("@")[0].strip()
        deadline = time.monotonic() + timeout
        while True:
            if self.process.poll() is not None:
                raise AssertionError("mitilog serve exited early with %d:\n%s"
                                     % (self.process.returncode, self.log()))
            if echoscu(self.dicom_port, calling=calling).returncode == 0:
                try:
                    status, _ = self.get("/healthz")
                    if status == 200:
                        return self
                except OSError:
                    pass
            if time.monotonic() > deadline:
                self.process.kill()
                raise AssertionError("mitilog serve did not answer C-ECHO and "
                                     "/healthz within %ds:\n%s"
                                     % (timeout, self.log()))
            time.sleep(0.2)

    def terminate(self):
        if self.process is not None and self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)

    def wait(self, timeout=60):
        try:
            self.returncode = self.process.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()
            raise AssertionError("mitilog serve did not exit within %ds of "
                                 "SIGTERM:\n%s" % (timeout, self.log()))
        finally:
            self._out.close()
            self._err.close()
            self.stopped_at = time.time()
        return self.returncode

    def stop(self, timeout=60):
        """SIGTERM, then assert exit status 0 and a clean log."""
        if self.process is None:
            return
        if self.returncode is None:
            self.terminate()
            self.wait(timeout)
        # common practice, no source: a daemon stopped with SIGTERM exits 0
        assert self.returncode == 0, (
            "mitilog serve exited with %d after SIGTERM:\n%s"
            % (self.returncode, self.log()))
        self.assert_clean_log()

    # -- log ---------------------------------------------------------------
    def log(self):
        try:
            with open(self.stderr_path, "rb") as f:
                return f.read().decode("utf-8", "replace")
        except FileNotFoundError:
            return ""

    def mark(self):
        """Offset in the log; pair with allow_errors_since()."""
        return len(self.log())

    def allow_errors_since(self, start):
        """Errors logged from start until now are expected ones."""
        self.allowed_error_windows.append((start, len(self.log())))

    def unexpected_errors(self):
        text = self.log()
        bad = []
        offset = 0
        for line in text.splitlines(keepends=True):
            begin, offset = offset, offset + len(line)
            if SANITIZER_RE.search(line):
                bad.append(line.rstrip())
                continue
            if not ERROR_RE.search(line):
                continue
            if any(s <= begin < e for s, e in self.allowed_error_windows):
                continue
            if any(re.search(p, line) for p in self.allowed_error_patterns):
                continue
            bad.append(line.rstrip())
        return bad

    def assert_clean_log(self):
        bad = self.unexpected_errors()
        assert not bad, "unexpected error lines in the log:\n" + "\n".join(bad)

    # -- HTTP --------------------------------------------------------------
    def get(self, path, timeout=10):
        """GET; returns (status, parsed JSON or raw text)."""
        url = "http://127.0.0.1:%d%s" % (self.http_port, path)
        try:
            with urllib.request.urlopen(url, timeout=timeout) as response:
                status, body = response.status, response.read()
        except urllib.error.HTTPError as e:
            status, body = e.code, e.read()
        text = body.decode("utf-8")  # the API promises UTF-8 JSON
        try:
            return status, json.loads(text)
        except ValueError:
            return status, text  # not JSON: the caller's assertion says so

    def get_json(self, path):
        status, body = self.get(path)
        assert status == 200, "GET %s -> %d %r" % (path, status, body)
        return body

    # -- DICOM -------------------------------------------------------------
    def storescu(self, files, calling="STORESCU", options=(), extra=()):
        cmd = (["storescu", "-R"] + list(options) + list(extra)
               + ["-aec", AE_TITLE, "-aet", calling, "127.0.0.1",
                  str(self.dicom_port)] + list(files))
        return run(cmd, timeout=300)

    def db(self):
        """Read-only connection to the daemon's database."""
        return sqlite3.connect("file:%s?mode=ro" % self.database, uri=True,
                               timeout=10)

    def import_(self, *paths):
        return run([BINARY, "import", "--config", self.config] + list(paths),
                   timeout=300)


@pytest.fixture(scope="session")
def fixtures(tmp_path_factory):
    """The generated fixtures: dict with 'dir', 'manifest' list."""
    out = tmp_path_factory.mktemp("fixtures")
    result = subprocess.run([sys.executable, MAKE_FIXTURES, str(out)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)
    assert result.returncode == 0, result.stderr
    with open(out / "manifest.json") as f:
        manifest = json.load(f)
    for entry in manifest["fixtures"]:
        entry["path"] = str(out / entry["file"])
    return dict(dir=str(out), manifest=manifest["fixtures"],
                skipped=manifest["skipped"])


@pytest.fixture
def daemon_factory(tmp_path):
    """Makes Daemon objects; at the end stops them and checks exit and log."""
    made = []

    def make(name="d", **kwargs):
        daemon = Daemon(tmp_path / name, **kwargs)
        made.append(daemon)
        return daemon

    yield make
    failures = []
    for daemon in made:
        try:
            daemon.stop()
        except AssertionError as e:
            failures.append(str(e))
    assert not failures, "\n\n".join(failures)


@pytest.fixture(scope="module")
def module_daemon_factory(tmp_path_factory):
    made = []

    def make(name="m", **kwargs):
        daemon = Daemon(tmp_path_factory.mktemp(name), **kwargs)
        made.append(daemon)
        return daemon

    yield make
    failures = []
    for daemon in made:
        try:
            daemon.stop()
        except AssertionError as e:
            failures.append(str(e))
    assert not failures, "\n\n".join(failures)


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    """On a failure, attach the stderr of every daemon of the test run."""
    outcome = yield
    report = outcome.get_result()
    if report.failed:
        for daemon in LIVE_DAEMONS:
            if daemon.process is None or (daemon.returncode is not None
                                          and daemon.stopped_at < call.start):
                continue  # not running during this test
            text = daemon.log()
            if text:
                tail = "\n".join(text.splitlines()[-150:])
                report.sections.append(("mitilog stderr (%s)" % daemon.workdir,
                                        tail))


def pytest_report_header(config):
    return "mitilog binary: %s" % BINARY
