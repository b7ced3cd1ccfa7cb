"""Several receivers, one audit (docs/sites.md): the site of each object,
filters and comparisons by site, re-sending across calling AE titles, and
the exam rebuild queue in the database (exam_jobs, migration 013).

A simulated department's studies are split in two and imported as two
sites (`import --site`), as two receivers would have taken them; the
statistics by site are checked against an oracle computed here with
Python's statistics module from the database's own tables. The queue
tests start their own daemon and send with DCMTK's storescu.
"""
import collections
import csv
import json
import os
import shutil
import signal
import statistics
import subprocess
import time

import pytest

from conftest import BINARY, REPO, run

DAYS = 2
SEED = 21


def set_receiver(daemon, site, log_level=None, **keys):
    """Adds a [receiver] section (and a log level) to the daemon's file."""
    with open(daemon.config) as f:
        text = f.read()
    if log_level is not None:
        text = text.replace("[log]\nlevel = info", "[log]\nlevel = %s" % log_level)
    text += "[receiver]\nsite = %s\n" % site
    for key, value in keys.items():
        text += "%s = %s\n" % (key, value)
    with open(daemon.config, "w") as f:
        f.write(text + "\n")


def wait_until(predicate, seconds, what):
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if predicate():
            return
        time.sleep(0.2)
    raise AssertionError("not within %ds: %s" % (seconds, what))


@pytest.fixture(scope="module")
def simulated(tmp_path_factory):
    out = tmp_path_factory.mktemp("sites-sim")
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED), "--out",
                  str(out)], timeout=300)
    assert result.returncode == 0, result.stderr
    by_study = collections.defaultdict(list)
    with open(os.path.join(str(out), "manifest.csv")) as f:
        for row in csv.DictReader(f):
            by_study[row["study_instance_uid"]].append(os.path.join(str(out), row["path"]))
    return dict(dir=str(out), by_study=by_study)


@pytest.fixture(scope="module")
def two_sites(module_daemon_factory, simulated, tmp_path_factory):
    """Every other study imported as site 'north', the rest as 'south'."""
    folders = {"north": str(tmp_path_factory.mktemp("north")),
               "south": str(tmp_path_factory.mktemp("south"))}
    expected = {}
    for i, study in enumerate(sorted(simulated["by_study"])):
        site = "north" if i % 2 == 0 else "south"
        expected[study] = site
        for j, path in enumerate(simulated["by_study"][study]):
            target = os.path.join(folders[site], "%d-%d.dcm" % (i, j))
            os.link(path, target)
    daemon = module_daemon_factory("sites")
    set_receiver(daemon, "north")
    for site, folder in folders.items():
        result = run([BINARY, "import", "--config", daemon.config, "--site", site, folder],
                     timeout=600)
        assert result.returncode == 0, result.stdout + result.stderr
    daemon.start()
    return daemon, expected


def test_each_object_records_its_site(two_sites):
    daemon, expected = two_sites
    with daemon.db() as db:
        rows = db.execute("SELECT study_instance_uid, site FROM instances").fetchall()
        summaries = dict(db.execute("SELECT study_instance_uid, site FROM exam_summaries"))
    # every instance carries the site of the import that took it, and an
    # exam the site of its first instance (here all of a study's); common
    # practice, no source
    assert rows and all(site == expected[study] for study, site in rows)
    assert summaries == {study: site for study, site in expected.items()}


def test_rejection_records_its_site(two_sites, tmp_path):
    daemon, _ = two_sites
    junk = tmp_path / "not-dicom.dcm"
    junk.write_bytes(b"this is not a DICOM file" * 20)
    result = run([BINARY, "import", "--config", daemon.config, "--site", "east", str(junk)])
    assert result.returncode == 1, result.stdout + result.stderr
    with daemon.db() as db:
        sites = [row[0] for row in db.execute(
            "SELECT site FROM rejections WHERE source_path = ?", (str(junk),))]
    assert sites == ["east"]
    ingest = daemon.get_json("/api/v1/ingest?site=east")
    assert ingest["totals"]["rejections"] == 1 and ingest["totals"]["instances"] == 0
    assert [r["site"] for r in ingest["rejections_recent"]] == ["east"]
    assert {s["site"] for s in daemon.get_json("/api/v1/ingest")["sites"]} == \
        {"north", "south", "east"}


def test_import_refuses_a_bad_site(two_sites, tmp_path):
    daemon, _ = two_sites
    result = run([BINARY, "import", "--config", daemon.config, "--site", "a,b", str(tmp_path)])
    assert result.returncode == 2 and "comma" in result.stderr


def test_check_config_shows_and_checks_the_site(two_sites, tmp_path):
    daemon, _ = two_sites
    result = run([BINARY, "check-config", daemon.config])
    assert result.returncode == 0, result.stderr
    assert "[receiver]" in result.stdout and "site = north" in result.stdout
    bad = tmp_path / "bad.ini"
    bad.write_text("[receiver]\nsite = \x01north\n")
    result = run([BINARY, "check-config", str(bad)])
    assert result.returncode == 2 and "[receiver] site" in result.stderr


def test_listings_filter_by_site(two_sites):
    daemon, expected = two_sites
    by_site = collections.defaultdict(set)
    for study, site in expected.items():
        by_site[site].add(study)
    everything = {s["study_instance_uid"] for s in daemon.get_json("/api/v1/studies")}
    assert everything == set(expected)
    for site in ("north", "south"):
        studies = daemon.get_json("/api/v1/studies?site=" + site)
        assert {s["study_instance_uid"] for s in studies} == by_site[site]
        assert {s["site"] for s in studies} == {site}
    # a comma list and a repeated parameter are the same request
    both = {s["study_instance_uid"] for s in daemon.get_json("/api/v1/studies?site=north,south")}
    again = {s["study_instance_uid"]
             for s in daemon.get_json("/api/v1/studies?site=north&site=south")}
    assert both == again == everything
    # a site nobody holds is an empty answer, not an error
    assert daemon.get_json("/api/v1/studies?site=nowhere") == []
    stats = daemon.get_json("/api/v1/stats?site=nowhere")
    assert stats["exam_count"] == 0 and stats["sites"] == ["nowhere"]
    # the totals of ingest status are those of the site
    with daemon.db() as db:
        north_instances = db.execute(
            "SELECT count(*) FROM instances WHERE site = 'north'").fetchone()[0]
    assert daemon.get_json("/api/v1/ingest?site=north")["totals"]["instances"] == north_instances
    # instances carry their site and are filtered by it
    instances = daemon.get_json("/api/v1/instances?site=south&limit=10000")
    assert instances and {i["site"] for i in instances} == {"south"}
    assert {i["study_instance_uid"] for i in instances} == by_site["south"] & {
        i["study_instance_uid"] for i in instances}
    study = sorted(by_site["north"])[0]
    assert daemon.get_json("/api/v1/instances?study=%s&site=south" % study) == []
    assert daemon.get_json("/api/v1/instances?study=%s&site=north" % study)
    # findings of a site are those of its exams
    findings = daemon.get_json("/api/v1/findings?site=south&limit=10000")
    assert all(f["site"] == "south" and f["study_instance_uid"] in by_site["south"]
               for f in findings)
    with daemon.db() as db:
        held = db.execute("SELECT count(*) FROM findings f JOIN exam_summaries s "
                          "ON s.study_instance_uid = f.study_instance_uid "
                          "WHERE f.superseded = 0 AND s.site = 'south'").fetchone()[0]
    assert len(findings) == held
    # the weekly list and the worklist read the site's exams only
    week = daemon.get_json("/api/v1/outliers?exams=all&site=north")
    listed = {e["study_instance_uid"] for g in week["groups"] for e in g["exams"]}
    assert listed and listed <= by_site["north"]
    worklist = daemon.get_json("/api/v1/worklist?site=south")
    assert all(f["site"] == "south" for f in worklist["findings"])
    drift = daemon.get_json("/api/v1/drift?site=north")
    assert drift["sites"] == ["north"]


@pytest.mark.parametrize("value, reason", [
    ("x" * 65, "1 to 64"),
    ("%01north", "control"),
    ("north,", "1 to 64"),
    (",".join("s%d" % i for i in range(17)), "at most 16"),
])
def test_malformed_site_is_400(two_sites, value, reason):
    daemon, _ = two_sites
    for path in ("/api/v1/studies", "/api/v1/stats", "/api/v1/outliers", "/api/v1/findings",
                 "/api/v1/worklist", "/api/v1/drift", "/api/v1/ingest", "/api/v1/operators",
                 "/api/v1/devices", "/api/v1/instances", "/api/v1/reviews"):
        status, body = daemon.get(path + "?site=" + value)
        assert status == 400, (path, status, body)
        assert body["error"].startswith("parameter site:") and reason in body["error"], body


def oracle_by_site(db, first, last):
    """Each exam's highest governing TI by the site of its first instance,
    for the exams whose day is in [first, last], from the tables the
    summaries are built from (exams, instances)."""
    values = collections.defaultdict(list)
    counts = collections.Counter()
    rows = db.execute("""
        SELECT e.study_instance_uid,
               CASE e.governing_index WHEN 'tis' THEN e.max_tis WHEN 'tib' THEN e.max_tib
                                      WHEN 'tic' THEN e.max_tic END,
               substr(coalesce(e.first_acquired_at,
                               (SELECT min(j.received_at) FROM instances j
                                WHERE j.study_instance_uid = e.study_instance_uid)), 1, 10),
               (SELECT i.site FROM instances i WHERE i.study_instance_uid = e.study_instance_uid
                ORDER BY coalesce(i.acquired_at, i.received_at), i.id LIMIT 1)
        FROM exams e""").fetchall()
    for _, value, day, site in rows:
        if first <= day <= last:
            counts[site] += 1
            if value is not None:
                values[site].append(value)
    return counts, values


def test_statistics_compare_sites(two_sites):
    daemon, _ = two_sites
    whole = daemon.get_json("/api/v1/stats")
    document = daemon.get_json("/api/v1/stats?by=site&from=%s&to=%s"
                               % (whole["from"], whole["to"]))
    assert document["by"] == "site"
    with daemon.db() as db:
        counts, values = oracle_by_site(db, document["from"], document["to"])
    rows = {row["key"]: row for row in document["rows"]}
    assert set(rows) == {"north", "south"} == set(counts)
    for site, row in rows.items():
        assert row["exam_count"] == counts[site]
        governing = row["governing"]
        assert governing["count"] == len(values[site])
        # median and P95 of each exam's highest governing TI, Hyndman & Fan
        # type 7 (Python statistics.quantiles method='inclusive', docs/api.md)
        assert governing["median"] == pytest.approx(statistics.median(values[site]), abs=1e-9)
        p95 = statistics.quantiles(values[site], n=100, method="inclusive")[94]
        assert governing["p95"] == pytest.approx(p95, abs=1e-9)
        assert governing["max"] == pytest.approx(max(values[site]), abs=1e-9)
    assert document["total"]["exam_count"] == sum(counts.values())
    # one site's statistics are its own row of the comparison
    north = daemon.get_json("/api/v1/stats?by=site&site=north&from=%s&to=%s"
                            % (document["from"], document["to"]))
    assert [r["key"] for r in north["rows"]] == ["north"]
    assert north["rows"][0]["governing"] == rows["north"]["governing"]
    # the weekly list groups by site as well
    week = daemon.get_json("/api/v1/outliers?group=site&exams=all")
    assert week["group_by"] == "site"
    assert {g["key"] for g in week["groups"]} <= {"north", "south"}
    for group in week["groups"]:
        assert all(e["site"] == group["key"] for e in group["exams"])


def test_report_takes_a_site(two_sites, tmp_path):
    daemon, expected = two_sites
    out = tmp_path / "week.json"
    result = run([BINARY, "report", "week", "--all-exams", "--format", "json", "--site", "south",
                  "--config", daemon.config, "--output", str(out)])
    assert result.returncode == 0, result.stderr
    document = json.loads(out.read_text())
    assert document["sites"] == ["south"]
    listed = {e["study_instance_uid"] for g in document["groups"] for e in g["exams"]}
    assert listed and all(expected[s] == "south" for s in listed)
    result = run([BINARY, "report", "stats", "--site", "a\x01", "--config", daemon.config])
    assert result.returncode == 2


# ---- one object, several receivers; the exam rebuild queue ---------------

def burst_study(simulated, size=5):
    """A study of the simulated department with at least size objects."""
    for study in sorted(simulated["by_study"]):
        files = sorted(simulated["by_study"][study])
        if len(files) >= size:
            return study, files[:size]
    raise AssertionError("no study of %d objects" % size)


def test_resend_across_calling_aes_keeps_one_row(daemon_factory, simulated):
    study, files = burst_study(simulated, 1)
    daemon = daemon_factory("resend")
    set_receiver(daemon, "east")
    daemon.start()
    for calling in ("SCANNER_A", "SCANNER_B"):
        result = daemon.storescu(files[:1], calling=calling)
        assert result.returncode == 0, result.stderr
    with daemon.db() as db:
        rows = db.execute("SELECT calling_ae_title, site, replaced_count FROM instances").fetchall()
    # re-sending replaces, never duplicates (docs/sites.md); the last write wins
    assert rows == [("SCANNER_B", "east", 1)]
    daemon.stop()
    # the same database behind a receiver of another site: the object it
    # takes again is one row, recorded with the site of the last receiver
    set_receiver(daemon, "west")
    daemon.returncode = None
    daemon.start()
    result = daemon.storescu(files[:1], calling="SCANNER_A")
    assert result.returncode == 0, result.stderr
    with daemon.db() as db:
        rows = db.execute("SELECT calling_ae_title, site, replaced_count FROM instances").fetchall()
    assert rows == [("SCANNER_A", "west", 2)]


def rebuild_lines(daemon, study):
    return [line for line in daemon.log().splitlines()
            if "study %s: exam record rebuilt" % study in line]


def test_one_rebuild_per_burst(daemon_factory, simulated):
    study, files = burst_study(simulated, 5)
    daemon = daemon_factory("burst")
    # a quiet period long enough for one association's five objects on a
    # loaded machine, so the burst is one by construction
    set_receiver(daemon, "main", log_level="debug", exam_settle_ms=2000, exam_max_wait_ms=60000)
    daemon.start()
    result = daemon.storescu(files)
    assert result.returncode == 0, result.stderr

    def rebuilt():
        with daemon.db() as db:
            return (db.execute("SELECT count(*) FROM exams WHERE study_instance_uid = ?",
                               (study,)).fetchone()[0] == 1
                    and db.execute("SELECT count(*) FROM exam_jobs").fetchone()[0] == 0)
    wait_until(rebuilt, 60, "exam rebuilt and the queue empty")
    time.sleep(1.0)  # a second rebuild, were there one, would be logged by now
    # five objects, one burst, one rebuild (common practice, no source)
    assert len(rebuild_lines(daemon, study)) == 1, daemon.log()
    jobs = daemon.get_json("/api/v1/ingest")["exam_jobs"]
    assert jobs == {"waiting": 0, "taken": 0}
    # the same study sent again later is another burst: one more rebuild
    result = daemon.storescu(files[:2])
    assert result.returncode == 0, result.stderr
    wait_until(lambda: len(rebuild_lines(daemon, study)) == 2, 60, "second burst rebuilt")


def test_kill_after_ack_loses_no_rebuild(daemon_factory, simulated):
    study, files = burst_study(simulated, 3)
    daemon = daemon_factory("kill")
    set_receiver(daemon, "main", exam_settle_ms=3000, exam_max_wait_ms=60000)
    daemon.start()
    result = daemon.storescu(files)
    assert result.returncode == 0, result.stderr
    # acknowledged, its exam waiting for the quiet period: killed now
    daemon.process.send_signal(signal.SIGKILL)
    daemon.process.wait(timeout=30)
    daemon._out.close()
    daemon._err.close()
    with daemon.db() as db:
        waiting = [tuple(row) for row in
                   db.execute("SELECT study_instance_uid, taken_by FROM exam_jobs").fetchall()]
        exams = db.execute("SELECT count(*) FROM exams").fetchone()[0]
    # the mark committed with the instances (a C-STORE is answered only
    # after its commit); common practice, no source
    assert waiting == [(study, None)] and exams == 0
    daemon.returncode = None
    daemon.start()

    def rebuilt():
        with daemon.db() as db:
            return (db.execute("SELECT instance_count FROM exams WHERE study_instance_uid = ?",
                               (study,)).fetchall() == [(len(files),)]
                    and db.execute("SELECT count(*) FROM exam_jobs").fetchone()[0] == 0)
    wait_until(rebuilt, 60, "exam rebuilt after the restart")


def sites_page(daemon, page, choose=None):
    """A dashboard page read in headless Chromium (tests/browser/sites_page.mjs)."""
    browser_dir = os.path.join(REPO, "tests", "browser")
    node = shutil.which("node")
    if not (node and os.path.exists("/usr/bin/chromium") and os.path.isdir(
            os.path.join(browser_dir, "node_modules", "playwright-core"))):
        if os.environ.get("MITILOG_REQUIRE_BROWSER"):
            pytest.fail("node, /usr/bin/chromium or tests/browser/node_modules missing")
        pytest.skip("node, chromium or playwright-core (npm ci in tests/browser) missing")
    url = "http://127.0.0.1:%d/%s" % (daemon.http_port, page)
    result = subprocess.run([node, os.path.join(browser_dir, "sites_page.mjs"), url]
                            + ([choose] if choose else []),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            timeout=180, cwd=browser_dir)
    lines = [line for line in result.stdout.splitlines() if line.startswith("{")]
    assert lines, result.stderr
    outcome = json.loads(lines[-1])
    assert not outcome["errors"], outcome["errors"]
    return outcome


def test_dashboard_compares_and_chooses_sites(two_sites):
    daemon, _ = two_sites
    whole = daemon.get_json("/api/v1/stats")
    outcome = sites_page(daemon, "stats.html?by=site&from=%s&to=%s" % (whole["from"], whole["to"]),
                         choose="south")
    before, after = outcome["before"], outcome["after"]
    # several sites hold data: the selector is shown with every site
    held = [s["site"] for s in daemon.get_json("/api/v1/sites")]
    assert before["selector_shown"] and before["options"] == ["All sites"] + held
    assert before["heading"] == "Site (compare sites)"
    assert before["keys"][:2] == ["north", "south"] and before["sites_fact"] == "all"
    # choosing a site reloads the page limited to it, comparison kept
    assert "site=south" in after["url"] and after["chosen"] == "south"
    assert after["sites_fact"] == "south" and after["keys"][0] == "south"
    assert "north" not in after["keys"]
    # the weekly list compares sites too
    week = sites_page(daemon, "index.html?group=site")["before"]
    assert week["heading"] == "Site (compare sites)"
    assert set(week["keys"]) <= {"north", "south"} and week["keys"]


def test_dashboard_hides_the_selector_for_one_site(daemon_factory, simulated):
    study, files = burst_study(simulated, 2)
    daemon = daemon_factory("one-site")
    daemon.start()
    result = daemon.storescu(files)
    assert result.returncode == 0, result.stderr
    assert [s["site"] for s in daemon.get_json("/api/v1/sites")] == ["main"]
    page = sites_page(daemon, "stats.html")["before"]
    assert not page["selector_shown"] and page["options"] == []
