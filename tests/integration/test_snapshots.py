"""Kept documents of the period views (migration 018, src/report/report_snapshot.c):
a document asked for again is answered from the database while the data of
its days is unchanged, and made again as soon as it is not.

Independent checks: each document is compared with the one `mitilog report`
makes afresh from the same database (a separate process that keeps
nothing), and the triggers' day counts are read with sqlite3 or psycopg2
after writes made by the test itself, not by mitilog. The simulated
department (seed 7, 14 days from 2026-11-02) spans ISO weeks 45 and 46.
"""
import glob
import json
import os
import signal
import time

import pytest

from conftest import BINARY, REPO, Daemon, run

DAYS = 14
SEED = 7
WEEK = "2026-W46"
WEEK_FROM, WEEK_TO = "2026-11-09", "2026-11-15"


def exam_folders(sim, day):
    return sorted(glob.glob(os.path.join(sim, day, "e*")))


@pytest.fixture(scope="module")
def department(tmp_path_factory):
    """The department less two held-back exams: one of week 46 (Tuesday)
    and one of week 45 (Wednesday), sent later by the tests."""
    work = tmp_path_factory.mktemp("snapshots")
    sim = os.path.join(str(work), "sim")
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED), "--out", sim],
                 timeout=300)
    assert result.returncode == 0, result.stderr
    held = {"week46": exam_folders(sim, "2026-11-10")[-1],
            "week45": exam_folders(sim, "2026-11-04")[-1]}
    os.makedirs(os.path.join(str(work), "held"))
    for name, folder in held.items():
        target = os.path.join(str(work), "held", name)
        os.rename(folder, target)
        held[name] = target
    daemon = Daemon(work, http=dict(refresh_seconds=1))
    daemon.policy = os.path.join(str(work), "policy.ini")
    write_policy(daemon.policy, "2.0")
    with open(daemon.config, "a") as f:
        f.write("[rules]\npolicy = %s\n" % daemon.policy)
    imported = daemon.import_(sim)
    assert "imported" in imported.stdout, imported.stderr
    daemon.start()
    daemon.held = held
    yield daemon
    daemon.stop()


def write_policy(path, ti_limit):
    """The shipped policy with the plain TI ceiling set to ti_limit."""
    with open(os.path.join(REPO, "conf", "policy.ini")) as f:
        text = f.read()
    assert "limit = 2.0\nlimit.group.ophthalmic = 1.0" in text
    with open(path, "w") as f:
        f.write(text.replace("limit = 2.0\nlimit.group.ophthalmic = 1.0",
                             "limit = %s\nlimit.group.ophthalmic = 1.0" % ti_limit))


def get(daemon, path):
    """(header Mitilog-Document, body text) of a 200 reply."""
    import urllib.request
    with urllib.request.urlopen("http://127.0.0.1:%d%s" % (daemon.http_port, path),
                                timeout=60) as reply:
        assert reply.status == 200
        return reply.headers.get("Mitilog-Document"), reply.read().decode("utf-8")


def fresh(daemon, *args):
    """The document `mitilog report` makes now, as text."""
    path = os.path.join(daemon.workdir, "fresh.out")
    result = run([BINARY, "report"] + list(args) + ["--config", daemon.config,
                                                     "--output", path], timeout=120)
    assert result.returncode == 0, result.stderr
    with open(path, encoding="utf-8", newline="") as f:
        return f.read()


VIEWS = [
    ("/api/v1/outliers?week=%s&group=preset" % WEEK,
     ("week", WEEK, "--group", "preset", "--format", "json")),
    ("/api/v1/outliers?week=%s&group=room&format=csv" % WEEK,
     ("week", WEEK, "--group", "room", "--format", "csv")),
    ("/api/v1/stats?from=%s&to=%s&by=exam_type" % (WEEK_FROM, WEEK_TO),
     ("stats", "--from", WEEK_FROM, "--to", WEEK_TO, "--by", "exam_type", "--format", "json")),
    ("/api/v1/stats?from=%s&to=%s&by=room&format=csv" % (WEEK_FROM, WEEK_TO),
     ("stats", "--from", WEEK_FROM, "--to", WEEK_TO, "--by", "room", "--format", "csv")),
]


def same_document(path, served, made):
    if path.endswith("csv"):
        assert served == made, path
    else:
        assert json.loads(served) == json.loads(made), path


def test_asked_again_is_kept_and_equal_to_a_fresh_one(department):
    for path, arguments in VIEWS:
        first_header, first = get(department, path)
        second_header, second = get(department, path)
        assert second_header.startswith("kept; made-at=20"), (path, second_header)
        assert second == first, path
        same_document(path, second, fresh(department, *arguments))
    # Drift has no CLI form: kept equals made.
    _, made = get(department, "/api/v1/drift?week=%s" % WEEK)
    header, kept = get(department, "/api/v1/drift?week=%s" % WEEK)
    assert header.startswith("kept"), header
    assert kept == made


def test_statistics_without_a_period_are_always_made(department):
    for _ in range(2):
        header, _ = get(department, "/api/v1/stats?by=exam_type")
        assert header.startswith("made; milliseconds="), header


def wait_for(what, predicate, seconds=60):
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        value = predicate()
        if value:
            return value
        time.sleep(0.2)
    raise AssertionError("timed out waiting for " + what)


def test_a_new_exam_of_the_period_is_counted_at_once(department):
    path = "/api/v1/stats?from=%s&to=%s&by=exam_type" % (WEEK_FROM, WEEK_TO)
    get(department, path)
    _, before = get(department, path)
    count = json.loads(before)["total"]["exam_count"]
    imported = department.import_(department.held["week46"])
    assert "imported" in imported.stdout, imported.stderr
    # Whether the refresher made it first or this request does, the answer
    # holds the new exam, and equals a fresh document.
    header, after = get(department, path)
    assert json.loads(after)["total"]["exam_count"] == count + 1, header
    same_document(path, after, fresh(department, "stats", "--from", WEEK_FROM, "--to", WEEK_TO,
                                     "--by", "exam_type", "--format", "json"))
    # The week's outliers (its days changed) follow too.
    path = "/api/v1/outliers?week=%s&group=preset" % WEEK
    _, outliers = get(department, path)
    same_document(path, outliers, fresh(department, "week", WEEK, "--group", "preset",
                                        "--format", "json"))


def test_an_exam_outside_the_period_leaves_it_kept(department):
    path = "/api/v1/stats?from=%s&to=%s&by=room" % (WEEK_FROM, WEEK_TO)
    get(department, path)
    header, before = get(department, path)
    assert header.startswith("kept"), header
    imported = department.import_(department.held["week45"])
    assert "imported" in imported.stdout, imported.stderr
    again_header, again = get(department, path)
    assert again_header == header   # the same kept document, not made again
    assert again == before
    # Week 46's outliers read week 45 as their baseline: made again.
    path = "/api/v1/outliers?week=%s&group=preset" % WEEK
    _, outliers = get(department, path)
    same_document(path, outliers, fresh(department, "week", WEEK, "--group", "preset",
                                        "--format", "json"))


def write(daemon, sql, parameters):
    """One write of the test's own to the daemon's database, committed."""
    connection = daemon.db(write=True)
    try:
        connection.execute(sql, parameters)
        connection.commit()
    finally:
        connection.close()


def day_changes(daemon, day):
    with daemon.db() as db:
        row = db.execute("SELECT changes FROM data_days WHERE day = ?", (day,)).fetchone()
    return row[0] if row else 0


def test_writes_by_anyone_raise_the_day_count(department):
    """The triggers count writes that do not go through mitilog's code:
    an UPDATE of a finding and of an exam summary made here."""
    with department.db() as db:
        study, day = db.execute(
            "SELECT f.study_instance_uid, s.day FROM findings f JOIN exam_summaries s "
            "ON s.study_instance_uid = f.study_instance_uid WHERE s.day BETWEEN ? AND ? "
            "ORDER BY f.id LIMIT 1", (WEEK_FROM, WEEK_TO)).fetchone()
    before = day_changes(department, day)
    write(department, "UPDATE findings SET assumptions = assumptions "
          "WHERE study_instance_uid = ?", (study,))
    middle = day_changes(department, day)
    assert middle > before
    write(department, "UPDATE exam_summaries SET site = site WHERE study_instance_uid = ?",
          (study,))
    assert day_changes(department, day) > middle


def test_the_refresher_makes_changed_documents_before_they_are_asked(department):
    """Each kind of request text is read back by the refresher and made
    again: the weekly list (with its settings), statistics, drift and the
    findings list (with its filters), after a write to a day they read."""
    paths = {
        "outliers": "/api/v1/outliers?week=%s&group=room&baseline_weeks=3&minimum=5" % WEEK,
        "statistics": "/api/v1/stats?from=%s&to=%s&by=preset" % (WEEK_FROM, WEEK_TO),
        "drift": "/api/v1/drift?week=%s&weeks=2&baseline_weeks=1" % WEEK,
        "findings": "/api/v1/findings?from=%s&to=%s&severity=warning&limit=50"
                    % (WEEK_FROM, WEEK_TO),
    }
    made = {}
    for view, path in paths.items():
        get(department, path)
        header, _ = get(department, path)
        assert header.startswith("kept"), (view, header)
        made[view] = header.split("made-at=")[1]
    with department.db() as db:
        (study,) = db.execute(
            "SELECT s.study_instance_uid FROM exam_summaries s WHERE s.day = ? AND EXISTS "
            "(SELECT 1 FROM findings f WHERE f.study_instance_uid = s.study_instance_uid "
            "AND f.severity = 'warning' AND substr(f.started_at, 1, 10) = s.day) LIMIT 1",
            (WEEK_FROM,)).fetchone()
    write(department, "UPDATE exam_summaries SET site = site WHERE study_instance_uid = ?",
          (study,))

    # The request texts (report_snapshot.c) by a part only each of these has.
    parts = {"outliers": "%group=room;baseline_weeks=3;%", "statistics": "%by=preset;%",
             "drift": "%;weeks=2;baseline_weeks=1;%", "findings": "%severity=warning;%limit=50;%"}

    def made_again():
        with department.db() as db:
            rows = {view: db.execute("SELECT made_at FROM report_snapshots WHERE view = ? "
                                     "AND request LIKE ?", (view, parts[view])).fetchall()
                    for view in paths}
        assert all(len(found) == 1 for found in rows.values()), rows
        return all(rows[view][0][0] > made[view] for view in paths)
    wait_for("the refresher to make every document again", made_again, 30)
    for view, path in paths.items():
        header, _ = get(department, path)
        assert header.startswith("kept"), (view, header)
        assert header.split("made-at=")[1] > made[view], view
    assert "made again after their data changed" in department.log()


def test_the_findings_list_follows_a_changed_finding(department):
    path = "/api/v1/findings?from=%s&to=%s" % (WEEK_FROM, WEEK_TO)
    get(department, path)
    header, before = get(department, path)
    assert header.startswith("kept"), header
    listed = json.loads(before)
    assert listed, "the week has findings"
    target = listed[len(listed) // 2]
    write(department, "UPDATE findings SET assumptions = ? WHERE id = ?",
          ("changed by the test", target["id"]))
    _, after = get(department, path)
    changed = [f for f in json.loads(after) if f["id"] == target["id"]]
    assert changed and changed[0]["assumptions"] == "changed by the test"
    # Another period's list is still the kept one.
    other = "/api/v1/findings?from=2026-11-02&to=2026-11-03"
    get(department, other)
    header, _ = get(department, other)
    assert header.startswith("kept"), header


def test_a_new_policy_and_a_rescore_make_the_documents_again(department):
    path = "/api/v1/stats?from=%s&to=%s&by=exam_type" % (WEEK_FROM, WEEK_TO)
    get(department, path)
    header, before = get(department, path)
    assert header.startswith("kept"), header
    old = department.get_json("/api/v1/policy")["version"]
    write_policy(department.policy, "0.4")
    department.process.send_signal(signal.SIGHUP)
    deadline = time.monotonic() + 30
    while department.get_json("/api/v1/policy")["version"] == old:
        assert time.monotonic() < deadline, department.log()
        time.sleep(0.2)
    result = run([BINARY, "rescore", "--config", department.config, "--from", WEEK_FROM,
                  "--to", WEEK_TO], timeout=300)
    assert result.returncode == 0, result.stderr
    _, after = get(department, path)
    fresh_text = fresh(department, "stats", "--from", WEEK_FROM, "--to", WEEK_TO, "--by",
                       "exam_type", "--format", "json")
    same_document(path, after, fresh_text)
    assert json.loads(after) != json.loads(before)
    assert json.loads(after)["policy_version"] != json.loads(before)["policy_version"] or \
        json.loads(after)["total"]["with_findings_count"] > \
        json.loads(before)["total"]["with_findings_count"]


def served_counts(daemon):
    """mitilog_documents_served_total by way, from GET /metrics."""
    _, text = daemon.get("/metrics")
    counts = {}
    for line in text.splitlines():
        if line.startswith("mitilog_documents_served_total{"):
            way = line.split('way="')[1].split('"')[0]
            counts[way] = int(float(line.rsplit(" ", 1)[1]))
    return counts


def test_metrics_count_kept_and_made_documents(department):
    before = served_counts(department)
    path = "/api/v1/drift?week=%s&weeks=3" % WEEK
    first, _ = get(department, path)
    second, _ = get(department, path)
    assert first.startswith("made") and second.startswith("kept"), (first, second)
    after = served_counts(department)
    assert after["made"] == before["made"] + 1
    assert after["kept"] == before["kept"] + 1
