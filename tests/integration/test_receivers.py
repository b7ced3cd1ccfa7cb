"""Several receivers, one PostgreSQL (docs/sites.md, docs/storage.md):
three daemons of three sites write to one database at once. The same
study's objects sent to two receivers at the same time are one row per
object, and the study's exam record is rebuilt once per burst whichever
receiver takes its job (the exam_jobs queue, taken FOR UPDATE SKIP
LOCKED); the statistics by site compare the three sites.

Runs on PostgreSQL whatever MITILOG_TEST_ENGINE says (the session's
throw-away server of conftest.py); skipped, saying why, when PostgreSQL's
server programs are not installed.
"""
import collections
import glob
import threading
import time

import pytest

from conftest import BINARY, POSTGRESQL
from sending import simulated_files, storescu_statuses

SITES = ("north", "south", "east")


def wait_until(predicate, seconds, what):
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if predicate():
            return
        time.sleep(0.2)
    raise AssertionError("not within %ds: %s" % (seconds, what))


@pytest.fixture(scope="module")
def sim(tmp_path_factory):
    return simulated_files(BINARY, tmp_path_factory.mktemp("receivers-sim"), 1)


def receivers(daemon_factory, tmp_path):
    """Three daemons, one site each, on one new database; debug logging
    names every rebuild and the receiver that made it."""
    if not glob.glob("/usr/lib/postgresql/*/bin/initdb"):
        pytest.skip("PostgreSQL's server programs are not installed "
                    "(deploy/install-dependencies.sh installs them)")
    conninfo = POSTGRESQL.database_for(str(tmp_path / "shared-database"))
    daemons = []
    for site in SITES:
        daemon = daemon_factory(site, storage=dict(engine="postgresql", connection=conninfo))
        with open(daemon.config) as f:
            text = f.read().replace("[log]\nlevel = info", "[log]\nlevel = debug")
        # A quiet period longer than the sends take on a loaded machine, so
        # that each burst is one by construction; the longest wait well
        # beyond it.
        text += ("\n[receiver]\nsite = %s\nexam_settle_ms = 4000\nexam_max_wait_ms = 120000\n"
                 % site)
        with open(daemon.config, "w") as f:
            f.write(text)
        daemons.append(daemon)
    starters = [threading.Thread(target=d.start) for d in daemons]
    for thread in starters:
        thread.start()
    for thread in starters:
        thread.join()
    assert all(d.process is not None and d.process.poll() is None for d in daemons)
    return daemons


def send_at_once(jobs):
    """[(daemon, files)] sent by one storescu each, all at the same time;
    the statuses of each."""
    results = [None] * len(jobs)

    def send(n):
        daemon, files = jobs[n]
        results[n] = storescu_statuses(daemon.dicom_port, files)

    threads = [threading.Thread(target=send, args=(n,)) for n in range(len(jobs))]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    return results


def rebuilds(daemons, study):
    """The "exam record rebuilt" lines of study over every receiver's log."""
    return [line for d in daemons for line in d.log().splitlines()
            if "study %s: exam record rebuilt" % study in line]


def settled(daemon, study, instance_count):
    with daemon.db() as db:
        exam = db.execute("SELECT instance_count FROM exams WHERE study_instance_uid = ?",
                          (study,)).fetchall()
        waiting = db.execute("SELECT count(*) FROM exam_jobs").fetchone()[0]
    return exam == [(instance_count,)] and waiting == 0


def test_three_sites_one_database_one_rebuild_per_burst(daemon_factory, tmp_path, sim):
    files, rows = sim
    north, south, east = daemons = receivers(daemon_factory, tmp_path)
    by_study = collections.OrderedDict()
    for f in files:
        by_study.setdefault(rows[f]["study_instance_uid"], []).append(f)
    studies = sorted(by_study, key=lambda s: (-len(by_study[s]), s))
    shared, own = studies[0], studies[1:4]
    assert len(by_study[shared]) >= 4 and len(own) == 3

    # One burst: the shared study's every object to north and south at
    # once, while each receiver also takes a study of its own.
    results = send_at_once([(north, by_study[shared]), (south, by_study[shared])]
                           + [(d, by_study[s]) for d, s in zip(daemons, own)])
    for statuses in results:
        assert set(statuses.values()) == {"Success"}, statuses
    count = len(by_study[shared])
    wait_until(lambda: settled(east, shared, count), 120, "the shared study rebuilt")
    for d, s in zip(daemons, own):
        wait_until(lambda: settled(d, s, len(by_study[s])), 120, "study %s rebuilt" % s)
    time.sleep(2.0)  # a second rebuild, were there one, would be logged by now

    # Re-sending replaces, never duplicates, also when two receivers take
    # the same object at the same time (design rule of the store; PS3.4
    # B.4.1 leaves duplicates to the SCP): one row per SOP Instance UID,
    # each replaced once, as the simulator's manifest names them.
    with east.db() as db:
        stored = db.execute("SELECT sop_instance_uid, replaced_count, site FROM instances "
                            "WHERE study_instance_uid = ?", (shared,)).fetchall()
    assert sorted(r[0] for r in stored) == sorted(rows[f]["sop_instance_uid"]
                                                  for f in by_study[shared])
    assert {r[1] for r in stored} == {1}
    assert {r[2] for r in stored} <= {"north", "south"}
    # One burst, one rebuild over all three receivers (common practice, no
    # source): the job is taken by one receiver only.
    lines = rebuilds(daemons, shared)
    assert len(lines) == 1, "\n".join(lines)
    for d, s in zip(daemons, own):
        assert len(rebuilds(daemons, s)) == 1, s

    # A later burst of the shared study, again to two receivers at once
    # (south and east this time), is one more rebuild.
    results = send_at_once([(south, by_study[shared][:2]), (east, by_study[shared][:2])])
    for statuses in results:
        assert set(statuses.values()) == {"Success"}, statuses
    wait_until(lambda: len(rebuilds(daemons, shared)) >= 2, 120, "the second burst rebuilt")
    wait_until(lambda: settled(north, shared, count), 120, "the queue empty again")
    time.sleep(2.0)
    assert len(rebuilds(daemons, shared)) == 2, "\n".join(rebuilds(daemons, shared))

    # The statistics by site compare the three sites: each exam counted
    # under the site of its first instance (docs/sites.md), as computed
    # here from the instances table.
    whole = north.get_json("/api/v1/stats")
    document = north.get_json("/api/v1/stats?by=site&from=%s&to=%s"
                              % (whole["from"], whole["to"]))
    assert document["by"] == "site"
    with north.db() as db:
        firsts = db.execute("""
            SELECT (SELECT i.site FROM instances i
                    WHERE i.study_instance_uid = e.study_instance_uid
                    ORDER BY coalesce(i.acquired_at, i.received_at), i.id LIMIT 1)
            FROM exams e""").fetchall()
    expected = collections.Counter(site for (site,) in firsts)
    counted = {row["key"]: row["exam_count"] for row in document["rows"]}
    assert set(counted) == set(SITES)
    assert counted == dict(expected)
    assert document["total"]["exam_count"] == 4
    # every receiver's dashboard answers the same comparison
    for d in (south, east):
        other = d.get_json("/api/v1/stats?by=site&from=%s&to=%s" % (whole["from"], whole["to"]))
        assert {row["key"]: row["exam_count"] for row in other["rows"]} == counted
