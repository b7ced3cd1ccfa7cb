#!/usr/bin/python3
"""Snapshots of the HTTP API's documents, to show that a change of the
code left them as they were.

    # the documents of one binary on the simulator's 3-day database
    /usr/bin/python3 tests/api_snapshot.py build --binary OLD/mitilog --out /tmp/snap-old
    /usr/bin/python3 tests/api_snapshot.py build --binary build/mitilog --out /tmp/snap-new
    # the same database served by another binary (an older database file
    # is migrated by the newer binary when it opens it)
    /usr/bin/python3 tests/api_snapshot.py build --binary build/mitilog \
        --database /tmp/snap-old/work/var/mitilog.sqlite3 --out /tmp/snap-migrated
    # the same database copied into PostgreSQL (mitilog copy-database into
    # an empty database) and served from there
    /usr/bin/python3 tests/api_snapshot.py build --binary build/mitilog \
        --database /tmp/snap-new/work/var/mitilog.sqlite3 \
        --connection 'host=127.0.0.1 port=55432 dbname=snapshot user=mitilog' --out /tmp/snap-pg
    # byte-for-byte comparison of two folders
    /usr/bin/python3 tests/api_snapshot.py compare /tmp/snap-old /tmp/snap-new

`build` simulates --days days (default 3) of the invented department with
--seed (default 1) from --start (default 2026-11-02), imports them with
`mitilog import` (the real pipeline: exams built, the policy evaluated),
starts `mitilog serve` on the database and saves the reply of every GET
document of docs/api.md (several periods, weeks, groupings, studies and
filters) as one file per request: status line, content type, then the
body exactly as sent. --database serves a copy of an existing database
file instead of importing. --connection serves a PostgreSQL database
instead of SQLite: the simulated files are imported into it, or with
--database that file is copied into it (`mitilog copy-database`, which
wants an empty database).

`compare` prints, per request, whether the two replies are byte for byte
equal. The documents carry the wall-clock times of the run (receipt,
evaluation, policy loading, generation), which differ between two
imports: a second comparison with the values of those keys masked is
printed for the documents that differ, so that what remains is what the
code changed. Exit status 0 when every reply is equal after masking,
1 otherwise.
"""
import argparse
import difflib
import json
import os
import re
import shutil
import signal
import socket
import sqlite3
import subprocess
import sys
import time
import urllib.error
import urllib.parse
import urllib.request

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))

# Keys whose values are the wall-clock time of the run (or derived from
# it), masked by `compare` in its second pass.
CLOCK_KEYS = {"received_at", "last_received_at", "first_received_at", "min_received_at",
              "evaluated_at", "updated_at", "loaded_at", "first_loaded_at",
              "generated_at", "hour", "first_without_at", "closed", "provisional",
              "objects_in_window", "silent"}
CLOCK_CSV = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?Z")


def free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def get(port, path):
    url = "http://127.0.0.1:%d%s" % (port, path)
    try:
        with urllib.request.urlopen(url, timeout=60) as response:
            return response.status, response.headers.get("Content-Type", ""), response.read()
    except urllib.error.HTTPError as e:
        return e.code, e.headers.get("Content-Type", ""), e.read()


def file_name(path):
    """One file per request path: safe characters only, unique."""
    return re.sub(r"[^A-Za-z0-9._-]", "_", path.strip("/")) or "root"


def write_config(work, policy, connection=None):
    config = os.path.join(work, "mitilog.ini")
    dicom_port, http_port = free_port(), free_port()
    with open(config, "w") as f:
        f.write("[dicom]\nae_title = MITILOG\nport = %d\n\n"
                "[http]\naddress = 127.0.0.1\nport = %d\n\n"
                "[storage]\ndata_directory = %s\nretention = header\n%s\n"
                "[rules]\npolicy = %s\n\n"
                "[log]\nlevel = warning\n"
                % (dicom_port, http_port, os.path.join(work, "var"),
                   "engine = postgresql\nconnection = %s\n" % connection if connection else "",
                   policy))
    return config, http_port


def requests(port):
    """The GET requests of docs/api.md over the database being served."""
    status, _, body = get(port, "/api/v1/studies")
    studies = json.loads(body) if status == 200 else []
    uids = [s["study_instance_uid"] for s in studies]
    days = sorted({(s.get("first_acquired_at") or "")[:10] for s in studies} - {""})
    # a few studies: the first, the last, and the ones with the most findings
    status, _, body = get(port, "/api/v1/findings?limit=10000")
    findings = json.loads(body) if status == 200 else []
    by_study = {}
    for finding in findings:
        if finding.get("study_instance_uid"):
            by_study[finding["study_instance_uid"]] = by_study.get(
                finding["study_instance_uid"], 0) + 1
    chosen = uids[:3] + uids[-2:] + sorted(by_study, key=lambda u: (-by_study[u], u))[:5]
    chosen = list(dict.fromkeys(chosen))
    # (not /api/v1/instances without study=: it is in order of receipt,
    # which a parallel import does not keep from one run to the next)
    paths = ["/healthz", "/api/v1/policy", "/api/v1/studies"]
    for day in days:
        paths.append("/api/v1/studies?from=%s&to=%s" % (day, day))
    for uid in chosen:
        paths.append("/api/v1/studies/%s" % uid)
        paths.append("/api/v1/instances?study=%s" % uid)
    paths += ["/api/v1/findings", "/api/v1/findings?include_superseded=1",
              "/api/v1/findings?severity=warning", "/api/v1/findings?severity=violation",
              "/api/v1/findings?severity=advisory", "/api/v1/findings?rule=ti_ceiling",
              "/api/v1/findings?rule=dwell_general", "/api/v1/findings?limit=7"]
    if days:
        paths.append("/api/v1/findings?from=%s&to=%s" % (days[0], days[0]))
    weeks = ["2026-W44", "2026-W45", "2026-W46"]
    for group in ("preset", "room", "shift", "transducer", "exam_type"):
        paths.append("/api/v1/outliers?group=%s" % group)
    for week in weeks:
        paths.append("/api/v1/outliers?week=%s&exams=all" % week)
        paths.append("/api/v1/outliers?week=%s&minimum=3&baseline_weeks=1" % week)
        paths.append("/api/v1/drift?week=%s" % week)
        paths.append("/api/v1/drift?week=%s&weeks=2&baseline_weeks=1" % week)
    paths += ["/api/v1/outliers?format=csv", "/api/v1/outliers?exams=all&format=csv"]
    for by in ("exam_type", "room", "preset", "shift", "transducer"):
        paths.append("/api/v1/stats?by=%s" % by)
    paths += ["/api/v1/stats?format=csv", "/api/v1/stats?by=room&format=csv"]
    for day in days:
        paths.append("/api/v1/stats?from=%s&to=%s" % (day, day))
    paths += ["/api/v1/drift", "/api/v1/ingest", "/api/v1/ingest?hours=720&days=90"]
    # errors are documents too
    paths += ["/api/v1/stats?from=2026-11-05&to=2026-11-01", "/api/v1/outliers?week=2025-W53",
              "/api/v1/studies/1.2.3.4.5.6.7.8.9", "/api/v1/findings?severity=loud",
              "/api/v1/nothing"]
    return paths


def build(args):
    out = os.path.abspath(args.out)
    if os.path.exists(out):
        shutil.rmtree(out)
    work = os.path.join(out, "work")
    documents = os.path.join(out, "documents")
    os.makedirs(os.path.join(work, "var"))
    os.makedirs(documents)
    shutil.copy(args.policy, os.path.join(work, "policy.ini"))
    config, port = write_config(work, os.path.join(work, "policy.ini"), args.connection)
    binary = os.path.abspath(args.binary)
    environment = dict(os.environ, TCP_NODELAY="1")
    if args.database and args.connection:
        result = subprocess.run([binary, "copy-database", "--from", args.database,
                                 "--to", args.connection], capture_output=True, text=True)
        if result.returncode != 0:
            sys.exit("copy-database failed: %s%s" % (result.stdout, result.stderr))
        print(result.stdout.strip().splitlines()[-1])
    elif args.database:
        source = sqlite3.connect("file:%s?mode=ro" % args.database, uri=True)
        target = sqlite3.connect(os.path.join(work, "var", "mitilog.sqlite3"))
        source.backup(target)
        target.close()
        source.close()
    else:
        simulated = os.path.join(work, "sim")
        subprocess.run([binary, "simulate", "--out", simulated, "--days", str(args.days),
                        "--seed", str(args.seed), "--start", args.start],
                       check=True, stdout=subprocess.DEVNULL)
        os.unlink(os.path.join(simulated, "manifest.csv"))
        result = subprocess.run([binary, "import", "--config", config, simulated],
                                capture_output=True, text=True, env=environment)
        if result.returncode != 0:
            sys.exit("import failed: %s%s" % (result.stdout, result.stderr))
        shutil.rmtree(simulated)
        print(result.stdout.strip())
    process = subprocess.Popen([binary, "serve", "--config", config], cwd=work,
                               env=environment, stdout=subprocess.DEVNULL,
                               stderr=open(os.path.join(work, "serve.stderr"), "wb"))
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                if get(port, "/healthz")[0] == 200:
                    break
            except OSError:
                pass
            if process.poll() is not None or time.monotonic() > deadline:
                sys.exit("mitilog serve did not start; see %s/serve.stderr" % work)
            time.sleep(0.2)
        paths = requests(port)
        index = []
        for path in paths:
            status, content_type, body = get(port, path)
            name = file_name(path)
            with open(os.path.join(documents, name), "wb") as f:
                f.write(b"%d %s\n" % (status, content_type.encode()))
                f.write(body)
            index.append("%s\t%s" % (name, path))
        with open(os.path.join(out, "index.tsv"), "w") as f:
            f.write("\n".join(index) + "\n")
        print("%d documents in %s" % (len(paths), documents))
    finally:
        process.send_signal(signal.SIGTERM)
        process.wait(timeout=120)


def masked(text):
    """The document with the values of CLOCK_KEYS replaced."""
    head, _, body = text.partition("\n")
    try:
        document = json.loads(body)
    except ValueError:
        return head + "\n" + CLOCK_CSV.sub("<clock>", body)

    def walk(value):
        if isinstance(value, dict):
            return {k: ("<clock>" if k in CLOCK_KEYS else walk(v)) for k, v in value.items()}
        if isinstance(value, list):
            return [walk(v) for v in value]
        return value
    return head + "\n" + json.dumps(walk(document), indent=1, sort_keys=True)


def compare(args):
    def load(folder):
        with open(os.path.join(folder, "index.tsv")) as f:
            return dict(line.rstrip("\n").split("\t", 1)[::-1] for line in f if line.strip())
    first, second = load(args.first), load(args.second)
    equal, clock_only, different = [], [], []
    for path in sorted(set(first) | set(second)):
        if path not in first or path not in second:
            different.append(path)
            print("only in %s: %s" % (args.first if path in first else args.second, path))
            continue
        with open(os.path.join(args.first, "documents", first[path]), "rb") as f:
            a = f.read()
        with open(os.path.join(args.second, "documents", second[path]), "rb") as f:
            b = f.read()
        if a == b:
            equal.append(path)
            continue
        ma = masked(a.decode("utf-8", "replace"))
        mb = masked(b.decode("utf-8", "replace"))
        if ma == mb:
            clock_only.append(path)
            continue
        different.append(path)
        print("DIFFERENT %s" % path)
        diff = difflib.unified_diff(ma.splitlines(), mb.splitlines(), args.first,
                                    args.second, lineterm="", n=2)
        for number, line in enumerate(diff):
            if number >= args.lines:
                print("  ...")
                break
            print("  " + line)
    print("%d byte for byte equal, %d equal but for run-time clock values, %d different"
          % (len(equal), len(clock_only), len(different)))
    if args.verbose:
        for path in clock_only:
            print("clock values only: %s" % path)
    return 1 if different else 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    commands = parser.add_subparsers(dest="command", required=True)
    b = commands.add_parser("build", help="save the documents of one binary")
    b.add_argument("--binary", default=os.path.join(REPO, "build", "mitilog"))
    b.add_argument("--out", required=True)
    b.add_argument("--database", help="serve a copy of this database instead of importing")
    b.add_argument("--connection",
                   help="serve this PostgreSQL database (libpq conninfo) instead of SQLite")
    b.add_argument("--policy", default=os.path.join(REPO, "conf", "policy.ini"))
    b.add_argument("--days", type=int, default=3)
    b.add_argument("--seed", type=int, default=1)
    b.add_argument("--start", default="2026-11-02")
    c = commands.add_parser("compare", help="compare two folders made by build")
    c.add_argument("first")
    c.add_argument("second")
    c.add_argument("--lines", type=int, default=60, help="diff lines shown per document")
    c.add_argument("--verbose", action="store_true")
    args = parser.parse_args()
    if args.command == "build":
        build(args)
        return 0
    return compare(args)


if __name__ == "__main__":
    sys.exit(main())
