"""Shared helpers of the benchmarks under bench/ (not a test module).

Each benchmark script imports this: it finds (or builds) the mitilog
binary, generates the simulated file set once into bench/out/, starts
`mitilog serve` and DCMTK's `storescp` on free loopback ports, and
formats the results. Every child process gets TCP_NODELAY=1 (see
docs/performance.md: without it a one-at-a-time sender is Nagle-bound).
"""
import atexit
import datetime
import os
import platform
import re
import shutil
import signal
import socket
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time

BENCH = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(BENCH)
OUT = os.path.join(BENCH, "out")
AE_TITLE = "MITILOG"
CALLING = "BENCH"

ENV = dict(os.environ, TCP_NODELAY="1")

# Run folders are removed at exit, not between runs: on ext4 without a
# journal (this machine's /tmp) every file created within 30 s of many
# deletions pays for skipping the recently deleted inodes
# (fs/ext4/ialloc.c recently_deleted()), so deleting one run's thousands
# of files would slow the next run's server, whichever it is. A folder of
# more than LARGE_FOLDER_BYTES (department-size objects: few files, many
# gigabytes) is removed at once instead, or a few runs would fill the disk.
_LEFT_OVER = []
LARGE_FOLDER_BYTES = 1 << 30


@atexit.register
def _remove_left_over():
    for folder in _LEFT_OVER:
        shutil.rmtree(folder, ignore_errors=True)


def folder_bytes(folder):
    total = 0
    for directory, _, names in os.walk(folder):
        for name in names:
            try:
                total += os.lstat(os.path.join(directory, name)).st_size
            except OSError:
                pass
    return total


def remove_later(folder):
    if folder_bytes(folder) > LARGE_FOLDER_BYTES:
        shutil.rmtree(folder, ignore_errors=True)
    else:
        _LEFT_OVER.append(folder)


def copy_database(source, destination):
    """Copies a SQLite database with SQLite's backup API: what a copy of
    the main file alone would miss (commits still in its WAL) is copied
    too."""
    src = sqlite3.connect("file:%s?mode=ro" % source, uri=True)
    dst = sqlite3.connect(destination)
    try:
        src.backup(dst, pages=65536)
    finally:
        dst.close()
        src.close()


def log(message):
    print(message, flush=True)


def mitilog_binary():
    """$MITILOG, else build/mitilog (built with cmake if missing)."""
    binary = os.environ.get("MITILOG")
    if binary:
        return os.path.abspath(binary)
    binary = os.path.join(ROOT, "build", "mitilog")
    if not os.path.exists(binary):
        build = os.path.join(ROOT, "build")
        if not os.path.exists(os.path.join(build, "CMakeCache.txt")):
            subprocess.run(["cmake", "-S", ROOT, "-B", build], check=True)
        subprocess.run(["cmake", "--build", build, "-j2"], check=True)
    return binary


def require_tools(*names):
    missing = [n for n in names if shutil.which(n) is None]
    if missing:
        sys.exit("bench: missing %s (bash deploy/install-dependencies.sh)"
                 % ", ".join(missing))


def file_set(binary, days, seed, limit=None, matrix=None):
    """The simulated files (sorted paths) and their total size in bytes.

    Generated once into bench/out/sim-d<days>-s<seed>[-m<matrix>]/files/
    (matrix: `mitilog simulate --matrix`, e.g. "640x480"; None: the tiny
    default); the manifest is moved beside files/ so that the folder holds
    DICOM files only."""
    folder = os.path.join(OUT, "sim-d%d-s%d%s" % (days, seed,
                                                 "-m" + matrix if matrix else ""))
    files_dir = os.path.join(folder, "files")
    done = os.path.join(folder, "complete")
    if not os.path.exists(done):
        shutil.rmtree(folder, ignore_errors=True)
        os.makedirs(folder)
        log("generating the file set: mitilog simulate --days %d --seed %d%s"
            % (days, seed, " --matrix " + matrix if matrix else ""))
        subprocess.run([binary, "simulate", "--out", files_dir, "--days",
                        str(days), "--seed", str(seed)]
                       + (["--matrix", matrix] if matrix else []), check=True,
                       stdout=subprocess.DEVNULL)
        os.rename(os.path.join(files_dir, "manifest.csv"),
                  os.path.join(folder, "manifest.csv"))
        open(done, "w").close()
    paths = []
    for directory, _, names in os.walk(files_dir):
        paths.extend(os.path.join(directory, n) for n in names
                     if n.endswith(".dcm"))
    paths.sort()
    if limit is not None:
        paths = paths[:limit]
    size = sum(os.path.getsize(p) for p in paths)
    return paths, size


def free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def echo(port):
    return subprocess.run(["echoscu", "-aet", CALLING, "-aec", AE_TITLE,
                           "127.0.0.1", str(port)], env=ENV,
                          stdout=subprocess.DEVNULL,
                          stderr=subprocess.DEVNULL).returncode == 0


def wait_for_echo(process, port, what, timeout=30):
    deadline = time.monotonic() + timeout
    while not echo(port):
        if process.poll() is not None:
            raise RuntimeError("%s exited early (%d)" % (what,
                                                         process.returncode))
        if time.monotonic() > deadline:
            raise RuntimeError("%s does not answer C-ECHO" % what)
        time.sleep(0.1)


def storescu_command(port, paths):
    """One association carrying every path (many files per association)."""
    return (["storescu", "-aet", CALLING, "-aec", AE_TITLE, "-nh",
             "127.0.0.1", str(port)] + list(paths))


def split(paths, parts):
    """parts contiguous slices of nearly equal length (studies stay whole
    except at the cuts)."""
    size, extra = divmod(len(paths), parts)
    out, start = [], 0
    for i in range(parts):
        end = start + size + (1 if i < extra else 0)
        out.append(paths[start:end])
        start = end
    return out


class Mitilog:
    """mitilog serve with a temporary configuration on free ports and a
    data directory under /tmp (removed by close()). With connection (a
    PostgreSQL conninfo) the store is that database instead of the SQLite
    file; site is [receiver] site."""

    def __init__(self, binary, retention="header", level="warning",
                 root="/tmp", durability="power_loss", dicom_extra=None,
                 connection=None, site=None):
        self.binary = binary
        self.connection = connection
        self.workdir = tempfile.mkdtemp(prefix="mitilog-bench-", dir=root)
        self.port = free_port()
        self.http_port = free_port()
        self.data = os.path.join(self.workdir, "var")
        self.database = os.path.join(self.data, "mitilog.sqlite3")
        self.config = os.path.join(self.workdir, "mitilog.ini")
        with open(self.config, "w") as f:
            dicom = dict(max_associations=16, acse_timeout_seconds=5,
                         dimse_timeout_seconds=60, max_pdu_bytes=65536)
            dicom.update(dicom_extra or {})
            f.write("[dicom]\nae_title = %s\nport = %d\n%s\n"
                    "[http]\naddress = 127.0.0.1\nport = %d\n\n"
                    "[storage]\ndata_directory = %s\nretention = %s\n"
                    "durability = %s\n%s\n"
                    "%s"
                    "[log]\nlevel = %s\n"
                    % (AE_TITLE, self.port,
                       "".join("%s = %s\n" % kv
                               for kv in dicom.items()),
                       self.http_port, self.data,
                       retention, durability,
                       ("engine = postgresql\nconnection = %s\n" % connection
                        if connection else ""),
                       "[receiver]\nsite = %s\n\n" % site if site else "",
                       level))
        self.stderr_path = os.path.join(self.workdir, "serve.stderr")
        self.process = None

    def start(self):
        self._err = open(self.stderr_path, "wb")
        self.process = subprocess.Popen(
            [self.binary, "serve", "--config", self.config], env=ENV,
            stdout=subprocess.DEVNULL, stderr=self._err)
        wait_for_echo(self.process, self.port, "mitilog serve")
        return self

    def cpu_seconds(self):
        """utime + stime of the serve process so far."""
        with open("/proc/%d/stat" % self.process.pid) as f:
            fields = f.read().rsplit(")", 1)[1].split()
        return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")

    def stop(self):
        if self.process is not None and self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
            try:
                self.process.wait(timeout=60)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()
                raise RuntimeError("mitilog serve ignored SIGTERM")
            self._err.close()
        return self.process.returncode

    def count(self, table="instances"):
        if self.connection:
            return postgresql_count(self.connection, table)
        with sqlite3.connect("file:%s?mode=ro" % self.database,
                             uri=True) as db:
            return db.execute("select count(*) from %s" % table).fetchone()[0]

    def log_tail(self, lines=20):
        try:
            with open(self.stderr_path, errors="replace") as f:
                return "".join(f.readlines()[-lines:])
        except OSError:
            return ""

    def close(self):
        self.stop()
        remove_later(self.workdir)


CLUSTER_SCRIPT = os.path.join(ROOT, "tests", "postgresql", "cluster.sh")


def has_postgresql_engine(binary):
    """Whether this build of mitilog knows [storage] engine = postgresql:
    check-config of a file that names it does not call the key unknown
    (the server it names need not answer)."""
    with tempfile.TemporaryDirectory(prefix="mitilog-bench-") as folder:
        config = os.path.join(folder, "engine.ini")
        with open(config, "w") as f:
            f.write("[storage]\nengine = postgresql\n"
                    "connection = host=127.0.0.1 port=1 dbname=none connect_timeout=1\n")
        result = subprocess.run([binary, "check-config", config], stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE, text=True, errors="replace")
    return not re.search(r"engine: (unknown key|.*unknown)", result.stderr)


def knows_key(binary, section, key, value):
    """Whether check-config of this build takes [section] key = value
    without calling the key unknown."""
    with tempfile.TemporaryDirectory(prefix="mitilog-bench-") as folder:
        config = os.path.join(folder, "key.ini")
        with open(config, "w") as f:
            f.write("[%s]\n%s = %s\n" % (section, key, value))
        result = subprocess.run([binary, "check-config", config], stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE, text=True, errors="replace")
    return "%s: unknown key" % key not in result.stderr


def postgresql_count(conninfo, table):
    import psycopg2  # Debian's python3-psycopg2
    connection = psycopg2.connect(conninfo)
    try:
        with connection.cursor() as cursor:
            cursor.execute('SELECT count(*) FROM "%s"' % table)
            return cursor.fetchone()[0]
    finally:
        connection.close()


class Postgresql:
    """A throw-away PostgreSQL server (tests/postgresql/cluster.sh: Debian's
    server, fsync on, 127.0.0.1) in a folder under /tmp, on a free port or
    the given one; database() makes an empty database and returns its
    conninfo. kill() is SIGKILL of the postmaster, start() again recovers."""

    def __init__(self, port=None, root="/tmp"):
        self.folder = tempfile.mkdtemp(prefix="mitilog-bench-postgresql-", dir=root)
        self.port = port or free_port()
        self.conninfo = None
        self.made = 0
        _LEFT_OVER.append(self.folder)
        atexit.register(self.stop)

    def start(self):
        result = subprocess.run(["bash", CLUSTER_SCRIPT, "start", self.folder, str(self.port)],
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        if result.returncode != 0:
            raise RuntimeError("cluster.sh start: " + result.stderr)
        self.conninfo = result.stdout.strip().splitlines()[-1]
        return self

    def of(self, database):
        return "host=127.0.0.1 port=%d dbname=%s user=mitilog" % (self.port, database)

    def execute(self, sql, database="mitilog"):
        import psycopg2
        connection = psycopg2.connect(self.of(database))
        connection.autocommit = True
        try:
            with connection.cursor() as cursor:
                cursor.execute(sql)
                return cursor.fetchall() if cursor.description else None
        finally:
            connection.close()

    def database(self, prefix="bench"):
        self.made += 1
        name = "%s_%d" % (prefix, self.made)
        self.execute("CREATE DATABASE %s" % name)
        return self.of(name)

    def kill(self):
        subprocess.run(["bash", CLUSTER_SCRIPT, "kill", self.folder])

    def stop(self):
        subprocess.run(["bash", CLUSTER_SCRIPT, "stop", self.folder],
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


class Storescp:
    """DCMTK's storescp --fork (one child process per association, so
    several associations are received at once) writing files to /tmp."""

    def __init__(self):
        self.workdir = tempfile.mkdtemp(prefix="storescp-bench-", dir="/tmp")
        self.port = free_port()
        self.process = None

    def start(self):
        self.process = subprocess.Popen(
            ["storescp", "--fork", "-aet", AE_TITLE, "-pdu", "65536",
             "-od", self.workdir, str(self.port)], env=ENV,
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        wait_for_echo(self.process, self.port, "storescp")
        return self

    def count(self):
        return sum(len(names) for _, _, names in os.walk(self.workdir))

    def close(self):
        if self.process is not None and self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
            try:
                self.process.wait(timeout=30)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()
        remove_later(self.workdir)


def run_senders(port, parts):
    """Starts one storescu per part at once; returns the wall time from the
    first start to the last exit and the exit statuses."""
    started = time.monotonic()
    senders = [subprocess.Popen(storescu_command(port, part), env=ENV,
                                stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE)
               for part in parts]
    errors = [s.communicate()[1] for s in senders]
    elapsed = time.monotonic() - started
    return elapsed, [s.returncode for s in senders], errors


def median(values):
    return statistics.median(values)


def machine():
    model = "unknown"
    try:
        with open("/proc/cpuinfo") as f:
            for line in f:
                if line.startswith("model name"):
                    model = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    return "%d cores, %s, Linux %s" % (os.cpu_count(), model,
                                       platform.release())


def header(title):
    log("%s -- %s" % (title, datetime.datetime.now().strftime(
        "%Y-%m-%d %H:%M")))
    log("machine: %s" % machine())
