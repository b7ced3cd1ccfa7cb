"""Nothing lost: SIGKILL at random moments while four senders push, many
associations with overlapping studies at once.

The promise under test (docs/conformance.md): a C-STORE is answered
Success only after its row is committed, so an object the sender saw
succeed survives a crash, and a re-send replaces rather than duplicates.

Knobs (the full forms run from bench/crash.sh):
  MITILOG_CRASH_SENDERS (4), MITILOG_CRASH_PER_SENDER (250),
  MITILOG_CRASH_KILLS (3), MITILOG_CRASH_SEED (1),
  MITILOG_CONCURRENCY_ASSOCIATIONS (8), MITILOG_CONCURRENCY_PER_ASSOCIATION (100)
"""

import math
import os
import random
import signal
import threading

from conftest import BINARY
from sending import simulated_files, split, storescu_statuses, wait_for_echo

SIM_FILES_PER_DAY = 1211  # mitilog simulate --seed 1, one day (observed)


def knob(name, default):
    return int(os.environ.get(name, default))


def make_files(tmp_path, count):
    days = max(1, math.ceil(count / SIM_FILES_PER_DAY))
    files, rows = simulated_files(BINARY, tmp_path / "sim", days)
    assert len(files) >= count, "simulator gave %d files" % len(files)
    return files[:count], rows


def uid_counts(daemon):
    with daemon.db() as db:
        return dict(db.execute("SELECT sop_instance_uid, count(*) FROM instances "
                               "GROUP BY sop_instance_uid"))


def integrity(daemon):
    """[("ok",)] when the store is sound. SQLite docs
    (pragma.html#pragma_integrity_check): "ok" when sound. PostgreSQL docs
    (F.2 amcheck): bt_index_check raises on a B-tree index that does not
    match its table (heapallindexed), so every index is checked and "ok"
    returned when none raised."""
    if daemon.engine == "postgresql":
        with daemon.db(write=True) as db:
            db.execute("CREATE EXTENSION IF NOT EXISTS amcheck")
            indexes = db.execute(
                "SELECT c.oid::regclass::text FROM pg_index i "
                "JOIN pg_class c ON c.oid = i.indexrelid JOIN pg_am a ON a.oid = c.relam "
                "WHERE a.amname = 'btree' AND c.relkind = 'i' "
                "AND c.relnamespace = 'public'::regnamespace").fetchall()
            for (index,) in indexes:
                db.execute("SELECT bt_index_check(?::regclass, true)", (index,))
        return [("ok",)]
    with daemon.db() as db:
        return db.execute("PRAGMA integrity_check").fetchall()


def assert_studies_consistent(daemon):
    """Per study: the exam record counts what the instances table holds."""
    with daemon.db() as db:
        bad = db.execute(
            "SELECT e.study_instance_uid, e.instance_count, count(i.id) "
            "FROM exams e LEFT JOIN instances i "
            "ON i.study_instance_uid = e.study_instance_uid "
            "GROUP BY e.study_instance_uid HAVING e.instance_count != count(i.id)"
        ).fetchall()
        missing = db.execute(
            "SELECT DISTINCT study_instance_uid FROM instances WHERE "
            "study_instance_uid NOT IN (SELECT study_instance_uid FROM exams)"
        ).fetchall()
    # docs/conformance.md (project): one exam record per study, rebuilt
    # from its instances; serve drains the rebuild queue at shutdown
    assert bad == [] and missing == [], (bad[:5], missing[:5])


def send_in_parallel(daemon, groups, calling="SENDER"):
    """One storescu per group at once; returns merged {path: status}."""
    results, threads = {}, []

    def one(index, group):
        results.update(storescu_statuses(daemon.dicom_port, group,
                                         calling="%s%d" % (calling, index)))

    for index, group in enumerate(groups):
        threads.append(threading.Thread(target=one, args=(index, group)))
        threads[-1].start()
    for thread in threads:
        thread.join()
    return results


def test_sigkill_at_random_moments_loses_nothing_acknowledged(daemon_factory, tmp_path):
    senders = knob("MITILOG_CRASH_SENDERS", 4)
    per_sender = knob("MITILOG_CRASH_PER_SENDER", 250)
    kills = knob("MITILOG_CRASH_KILLS", 3)
    rng = random.Random(knob("MITILOG_CRASH_SEED", 1))
    total = senders * per_sender
    files, rows = make_files(tmp_path, total)
    daemon = daemon_factory("crash").start()

    acknowledged, lock = set(), threading.Lock()
    other_statuses = []
    thresholds = sorted(rng.sample(range(total // 10, total * 9 // 10), kills))
    progress = threading.Condition(lock)
    done = threading.Event()

    def on_status(path, status):
        with progress:
            if status == "Success":
                acknowledged.add(path)
            else:
                other_statuses.append((path, status))
            progress.notify_all()

    def killer():
        for threshold in thresholds:
            with progress:
                progress.wait_for(lambda: len(acknowledged) >= threshold or done.is_set())
            if done.is_set():
                return
            daemon.process.send_signal(signal.SIGKILL)
            daemon.process.wait()
            daemon._out.close()
            daemon._err.close()
            daemon.start()

    def sender(index, group):
        for _ in range(kills + 20):
            with lock:
                remaining = [f for f in group if f not in acknowledged]
            if not remaining:
                return
            wait_for_echo(daemon.dicom_port)
            storescu_statuses(daemon.dicom_port, remaining,
                              calling="SENDER%d" % index, on_status=on_status)

    kill_thread = threading.Thread(target=killer)
    kill_thread.start()
    threads = [threading.Thread(target=sender, args=(i, g))
               for i, g in enumerate(split(files, senders))]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    done.set()
    with progress:
        progress.notify_all()
    kill_thread.join()

    # Every kill happened while objects were in flight (thresholds < total).
    assert len(acknowledged) == total, "%d of %d acknowledged" % (len(acknowledged), total)
    # PS3.4 B.2.3: Success means the SCP has stored the object; A700 (out of
    # resources) is the only failure this daemon gives a valid object.
    assert all(s.startswith("Refused: OutOfResources") for _, s in other_statuses), other_statuses[:5]
    counts = uid_counts(daemon)
    expected = {rows[f]["sop_instance_uid"] for f in acknowledged}
    # every acknowledged object in the database exactly once
    assert {u: counts.get(u, 0) for u in expected if counts.get(u, 0) != 1} == {}
    assert integrity(daemon) == [("ok",)]

    # Senders that saw failures re-send: a re-send replaces, never duplicates.
    statuses = send_in_parallel(daemon, split(files, senders))
    assert sorted(set(statuses.values())) == ["Success"], set(statuses.values())
    counts = uid_counts(daemon)
    assert len(counts) == len({rows[f]["sop_instance_uid"] for f in files})
    assert set(counts.values()) == {1}
    daemon.stop()
    assert_studies_consistent(daemon)


def test_many_associations_with_overlapping_studies(daemon_factory, tmp_path):
    associations = knob("MITILOG_CONCURRENCY_ASSOCIATIONS", 8)
    per_association = knob("MITILOG_CONCURRENCY_PER_ASSOCIATION", 100)
    files, rows = make_files(tmp_path, associations * per_association)
    daemon = daemon_factory("concurrent").start()
    # Round-robin split: every study's images go out on several
    # associations at once, so the study record is rebuilt concurrently.
    statuses = send_in_parallel(daemon, split(files, associations))
    assert len(statuses) == len(files)
    assert set(statuses.values()) == {"Success"}, set(statuses.values())
    counts = uid_counts(daemon)
    assert len(counts) == len(files) and set(counts.values()) == {1}
    per_study = {}
    for f in files:
        per_study[rows[f]["study_instance_uid"]] = per_study.get(rows[f]["study_instance_uid"], 0) + 1
    with daemon.db() as db:
        stored = dict(db.execute("SELECT study_instance_uid, count(*) FROM instances "
                                 "GROUP BY study_instance_uid"))
    assert stored == per_study
    assert integrity(daemon) == [("ok",)]
    daemon.stop()
    assert_studies_consistent(daemon)
