"""Black-box harness: starts the real mitilog daemon with a generated
configuration and talks to it the way a modality or PACS would (DCMTK's
echoscu and storescu), then reads the HTTP API and the database.

Environment:
  MITILOG_BINARY       the executable under test (default: build/mitilog)
  MITILOG_TEST_ENGINE  sqlite (default) or postgresql: the store every test
                       daemon writes to. With postgresql the session starts
                       one throw-away server (tests/postgresql/cluster.sh)
                       and each daemon gets a fresh database of its own.
  MITILOG_TEST_POSTGRESQL_PORT  the server's port (default: a free one)

Tests that read what was stored use Daemon.db(), which answers the same
way on both engines (Python's sqlite3, or psycopg2 for PostgreSQL, with
"?" and "?N" parameters on both). Tests about SQLite itself (its file,
its faults, its pragmas) are marked @pytest.mark.sqlite_only("why").
"""

import json
import os
import random
import re
import signal
import socket
import shutil
import sqlite3
import subprocess
import sys
import tempfile
import threading
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

ENGINE = os.environ.get("MITILOG_TEST_ENGINE", "sqlite").strip() or "sqlite"
if ENGINE not in ("sqlite", "postgresql"):
    raise pytest.UsageError("MITILOG_TEST_ENGINE is %r; it must be sqlite or postgresql"
                            % ENGINE)
CLUSTER_SCRIPT = os.path.join(REPO, "tests", "postgresql", "cluster.sh")


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
    # Two test passes side by side (tests/run.sh) take separate ranges,
    # MITILOG_TEST_PORTS=LOW-HIGH, so they never race for one port.
    asked = os.environ.get("MITILOG_TEST_PORTS", "")
    if asked:
        first, _, last = asked.partition("-")
        low, high = max(low, int(first)), min(high, int(last))
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
        # A test that names its engine (storage=dict(engine=...)) gets it.
        self.engine = sections["storage"].get("engine", ENGINE)
        self.connection = sections["storage"].get("connection")
        if self.engine == "postgresql" and self.connection is None:
            self.connection = POSTGRESQL.database_for(self.workdir)
            sections["storage"]["engine"] = "postgresql"
            sections["storage"]["connection"] = self.connection
        if self.engine == "sqlite":
            sections["storage"].pop("engine", None)   # the default
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
            time.sleep(0.05)

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

    def shared_storage(self):
        """The [storage] keys of a second receiver (its own configuration
        and data folder, as on another machine) writing to this daemon's
        database, whatever the engine."""
        if self.engine == "postgresql":
            return dict(engine="postgresql", connection=self.connection)
        return dict(database=self.database)

    def db(self, write=False):
        """A connection to the daemon's database, read-only unless write:
        sqlite3's own on SQLite, a StoreConnection (the same execute /
        fetchone / fetchall, "?" and "?N" parameters) on PostgreSQL."""
        if self.engine == "postgresql":
            return StoreConnection(self.connection, write=write)
        if write:
            return sqlite3.connect(self.database, timeout=10)
        return sqlite3.connect("file:%s?mode=ro" % self.database, uri=True,
                               timeout=10)

    def import_(self, *paths):
        return run([BINARY, "import", "--config", self.config] + list(paths),
                   timeout=300)


# -- PostgreSQL -----------------------------------------------------------

PARAMETER_RE = re.compile(
    r"""('(?:[^']|'')*'|"(?:[^"]|"")*"|--[^\n]*|\?(\d*)|(?<!:):([A-Za-z_][A-Za-z0-9_]*)|%)""")


def postgresql_sql(sql, parameters):
    """SQLite-style SQL ("?", "?N", ":name") to psycopg2's ("%s", positional):
    returns (sql, parameters). String literals, quoted names and comments
    are kept; every "%" is doubled (psycopg2 formats the whole text). Common practice, no source."""
    if isinstance(parameters, dict):
        raise TypeError("StoreConnection takes positional parameters only")
    given = list(parameters or ())
    ordered = []
    # SQLite's numbering (lang_expr.html#varparam): "?" takes the number
    # after the largest so far, "?N" is N, and ":name" takes the number
    # after the largest so far the first time it appears, its own again
    # after that.
    largest = [0]
    named = {}

    def replace(match):
        token = match.group(1)
        if token == "%":
            return "%%"
        if token.startswith(":") and match.group(3):
            name = match.group(3)
            if name not in named:
                largest[0] += 1
                named[name] = largest[0]
            ordered.append(given[named[name] - 1])
            return "%s"
        if not token.startswith("?"):
            return token.replace("%", "%%")  # psycopg2 reads % inside literals too
        number = int(match.group(2)) if match.group(2) else largest[0] + 1
        largest[0] = max(largest[0], number)
        ordered.append(given[number - 1])
        return "%s"

    return PARAMETER_RE.sub(replace, sql), ordered


def database_errors():
    """The exceptions a refused statement raises on either engine."""
    errors = [sqlite3.DatabaseError]
    if ENGINE == "postgresql":
        import psycopg2
        errors.append(psycopg2.Error)
    return tuple(errors)


class StoreConnection:
    """A PostgreSQL connection that answers like Python's sqlite3 for what
    the tests do: execute() returns a cursor with fetchone/fetchall and is
    iterable; `with` commits (or rolls back) and keeps it open. Read-only
    connections run each statement in its own transaction, so that a test
    never holds a snapshot or a lock while the daemon works."""

    def __init__(self, conninfo, write=False):
        import psycopg2  # Debian's python3-psycopg2 (deploy/install-dependencies.sh)
        import psycopg2.extensions
        self.connection = psycopg2.connect(conninfo, connect_timeout=10)
        # numeric as SQLite's storage classes give it, as the store's engine
        # reads it: an integer when written without a fraction, else a real
        # (sqlite.org/datatype3.html section 2)
        numeric = psycopg2.extensions.new_type(
            (1700,), "NUMERIC_AS_SQLITE",
            lambda text, cursor: None if text is None else
            (int(text) if re.fullmatch(r"[-+]?\d+", text) else float(text)))
        psycopg2.extensions.register_type(numeric, self.connection)
        if not write:
            self.connection.set_session(readonly=True, autocommit=True)

    def execute(self, sql, parameters=()):
        sql, ordered = postgresql_sql(sql, parameters)
        cursor = self.connection.cursor()
        cursor.execute(sql, ordered)
        return cursor

    def commit(self):
        self.connection.commit()

    def rollback(self):
        self.connection.rollback()

    def close(self):
        self.connection.close()

    def __enter__(self):
        return self

    def __exit__(self, kind, value, traceback):
        if not self.connection.autocommit:
            if kind is None:
                self.connection.commit()
            else:
                self.connection.rollback()
        return False


class PostgresqlServer:
    """The session's one throw-away PostgreSQL server (cluster.sh), started
    on first use; one database per daemon working directory, so that a
    second Daemon on the same directory finds the first one's data, as a
    second daemon on the same SQLite file would."""

    def __init__(self):
        self.lock = threading.Lock()
        self.folder = None
        self.conninfo = None   # of the server's maintenance database
        self.port = None
        self.databases = {}    # working directory -> database name

    def start(self):
        with self.lock:
            if self.conninfo is not None:
                return
            # The server runs as the user postgres when the tests run as
            # root; pytest's own temporary folder is closed to other users,
            # so the cluster lives in a folder of its own under /tmp.
            self.folder = tempfile.mkdtemp(prefix="mitilog-test-postgresql-")
            self.port = int(os.environ.get("MITILOG_TEST_POSTGRESQL_PORT") or free_port())
            # "fast": fsync off; the tests kill processes, never the machine
            result = subprocess.run(["bash", CLUSTER_SCRIPT, "start", self.folder,
                                     str(self.port), "fast"], stdout=subprocess.PIPE,
                                    stderr=subprocess.PIPE, text=True, timeout=180)
            if result.returncode != 0:
                raise RuntimeError("tests/postgresql/cluster.sh could not start a server:\n"
                                   + result.stderr)
            self.conninfo = result.stdout.strip().splitlines()[-1]

    def stop(self):
        with self.lock:
            if self.folder is None:
                return
            subprocess.run(["bash", CLUSTER_SCRIPT, "stop", self.folder],
                           stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                           timeout=120)
            shutil.rmtree(self.folder, ignore_errors=True)
            self.folder = self.conninfo = None

    def conninfo_of(self, database):
        return "host=127.0.0.1 port=%d dbname=%s user=mitilog" % (self.port, database)

    def create_database(self, name):
        import psycopg2
        connection = psycopg2.connect(self.conninfo, connect_timeout=10)
        try:
            connection.autocommit = True  # CREATE DATABASE runs outside a transaction
            with connection.cursor() as cursor:
                cursor.execute("CREATE DATABASE %s" % name)
        finally:
            connection.close()

    def database_for(self, workdir):
        """The conninfo of workdir's own database (created on first use)."""
        self.start()
        with self.lock:
            name = self.databases.get(workdir)
            if name is None:
                name = "t_%d" % (len(self.databases) + 1)
                self.create_database(name)
                self.databases[workdir] = name
        return self.conninfo_of(name)


POSTGRESQL = PostgresqlServer()


def pytest_configure(config):
    config.addinivalue_line(
        "markers", "sqlite_only(reason): the test is about SQLite itself (its file, "
        "faults, pragmas); skipped when MITILOG_TEST_ENGINE=postgresql")


def pytest_collection_modifyitems(config, items):
    if ENGINE == "sqlite":
        return
    for item in items:
        marker = item.get_closest_marker("sqlite_only")
        if marker is not None:
            reason = marker.args[0] if marker.args else marker.kwargs.get("reason", "")
            item.add_marker(pytest.mark.skip(reason="SQLite only: " + reason))


@pytest.fixture(scope="session", autouse=True)
def postgresql_server_lifetime():
    """Stops the session's PostgreSQL server (if one was started) after
    every other fixture has stopped its daemons: session fixtures are torn
    down last, the first made last of all. A daemon still running then (a
    test that did not stop its own) is killed first, so that it never
    meets its server gone."""
    yield POSTGRESQL
    for daemon in LIVE_DAEMONS:
        if daemon.process is not None and daemon.process.poll() is None:
            daemon.process.kill()
            daemon.process.wait()
    POSTGRESQL.stop()


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
    return "mitilog binary: %s; engine: %s" % (BINARY, ENGINE)
