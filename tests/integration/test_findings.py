"""The ALARA policy engine, live: findings of the simulator's planted
problems via /api/v1/findings, the policy via /api/v1/policy, SIGHUP with an
edited policy, `mitilog rescore` idempotence, provisional -> closed.

Expected values: docs/demo.md "Planted problems" (which studies carry
mi-over-limit and tic-high), docs/policy.md (equipment_maxima MI 1.9,
ti_ceiling TI 2.0 on the governing index; TIC for transcranial exams, domain
reference section 3), the design rule that rescoring twice changes nothing.
"""
import csv
import os
import re
import shutil
import signal
import subprocess
import time

import pytest

from conftest import BINARY, REPO, run

DAYS = 12          # days 5 and 12 carry mi-over-limit, day 10 tic-high
SEED = 1


@pytest.fixture(scope="module")
def simulated(tmp_path_factory):
    out = tmp_path_factory.mktemp("sim")
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED),
                  "--out", str(out)], timeout=300)
    assert result.returncode == 0, result.stderr
    with open(os.path.join(str(out), "manifest.csv")) as f:
        rows = list(csv.DictReader(f))
    return dict(dir=str(out), rows=rows)


def planted(rows, tag):
    return sorted({r["study_instance_uid"] for r in rows
                   if tag in (r["planted"] or "").split(";")})


def write_policy(path, ti_limit="2.0", idle_minutes="0.05"):
    # A short closing time (3 s) so the provisional -> closed sweep is seen.
    with open(os.path.join(REPO, "conf", "policy.ini")) as f:
        text = f.read()
    text = text.replace("closed_after_idle_minutes = 60",
                        "closed_after_idle_minutes = %s" % idle_minutes)
    # ti_ceiling's plain limit is the line before its ophthalmic one.
    text = text.replace("limit = 2.0\nlimit.group.ophthalmic = 1.0",
                        "limit = %s\nlimit.group.ophthalmic = 1.0" % ti_limit)
    with open(path, "w") as f:
        f.write(text)


def policy_version(config):
    result = run([BINARY, "check-config", config])
    assert result.returncode == 0, result.stderr
    return re.search(r"; policy .*version ([0-9a-f]{64})", result.stdout).group(1)


def findings_rows(daemon):
    with daemon.db() as db:
        return db.execute("SELECT * FROM findings ORDER BY id").fetchall()


@pytest.fixture(scope="module")
def department(module_daemon_factory, simulated):
    daemon = module_daemon_factory("findings")
    policy = os.path.join(daemon.workdir, "policy.ini")
    write_policy(policy)
    with open(daemon.config, "a") as f:
        f.write("[rules]\npolicy = %s\n\n[site]\nrules = %s\n"
                % (policy, os.path.join(REPO, "conf", "site.ini")))
    daemon.start()
    days = sorted(d for d in os.listdir(simulated["dir"]) if d[:4].isdigit())
    result = daemon.import_(*[os.path.join(simulated["dir"], d) for d in days])
    assert result.returncode == 0, result.stderr
    return dict(daemon=daemon, policy=policy, sim=simulated)


def test_policy_version_matches_check_config(department):
    daemon = department["daemon"]
    body = daemon.get_json("/api/v1/policy")
    assert body["version"] == policy_version(daemon.config)
    ids = [r["id"] for r in body["rules"]]
    assert "ti_ceiling" in ids and "equipment_maxima" in ids
    ti = [r for r in body["rules"] if r["id"] == "ti_ceiling"][0]
    assert float(ti["settings"]["limit"]) == 2.0    # docs/policy.md defaults
    assert ti["source"] and "caution" in body


def test_planted_problems_are_found(department):
    daemon, rows = department["daemon"], department["sim"]["rows"]
    mi_studies = planted(rows, "mi-over-limit")
    assert len(mi_studies) == 2                     # days 5 and 12 (docs/demo.md)
    found = daemon.get_json("/api/v1/findings?rule=equipment_maxima&limit=10000")
    assert sorted({f["study_instance_uid"] for f in found}) == mi_studies
    for finding in found:
        assert finding["severity"] == "violation"
        assert finding["measured_value"] == pytest.approx(2.1)   # docs/demo.md
        assert finding["limit_value"] == pytest.approx(1.9)      # docs/policy.md
        assert finding["instance_uids"]
    (tic,) = planted(rows, "tic-high")
    study = daemon.get_json("/api/v1/studies/%s" % tic)
    ceilings = [f for f in study["findings"] if f["rule_id"] == "ti_ceiling"]
    assert ceilings and ceilings[0]["governing_index"] == "tic"  # domain ref s.3
    assert ceilings[0]["measured_value"] > 2.0
    assert study["measurements"]["governing_index"] == "tic"
    # filters: a severity that has none of these
    assert daemon.get_json("/api/v1/findings?severity=violation&rule=ti_ceiling") == []
    status, _ = daemon.get("/api/v1/findings?severity=bad")
    assert status == 400


def test_provisional_then_closed(department):
    daemon = department["daemon"]
    # closed_after_idle_minutes = 0.05 (3 s); the sweep runs every second.
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        with daemon.db() as db:
            open_count = db.execute(
                "SELECT count(*) FROM findings WHERE superseded = 0 AND provisional = 1"
            ).fetchone()[0]
            closed = db.execute("SELECT count(*) FROM exam_context WHERE closed = 0").fetchone()[0]
        if open_count == 0 and closed == 0:
            break
        time.sleep(1)
    assert open_count == 0 and closed == 0


def test_rescore_twice_changes_nothing(department):
    daemon = department["daemon"]
    first = run([BINARY, "rescore", "--config", daemon.config])
    assert first.returncode == 0, first.stderr
    before = findings_rows(daemon)
    second = run([BINARY, "rescore", "--config", daemon.config])
    assert second.returncode == 0, second.stderr
    assert "0 findings written, 0 findings superseded" in second.stdout
    assert findings_rows(daemon) == before


def test_sighup_new_policy(department):
    daemon, rows = department["daemon"], department["sim"]["rows"]
    old = daemon.get_json("/api/v1/policy")["version"]
    write_policy(department["policy"], ti_limit="1.5")
    new = policy_version(daemon.config)
    assert new != old
    daemon.process.send_signal(signal.SIGHUP)
    deadline = time.monotonic() + 20
    while daemon.get_json("/api/v1/policy")["version"] != new:
        assert time.monotonic() < deadline, daemon.log()
        time.sleep(0.2)
    # Re-send the tic-high study: its findings are re-evaluated under the
    # new version; the old version's are kept, superseded.
    (tic,) = planted(rows, "tic-high")
    files = [os.path.join(department["sim"]["dir"], r["path"]) for r in rows
             if r["study_instance_uid"] == tic]
    result = daemon.storescu(files)
    assert result.returncode == 0, result.stderr
    deadline = time.monotonic() + 30
    while True:
        study = daemon.get_json("/api/v1/studies/%s" % tic)
        versions = {f["policy_version"] for f in study["findings"]}
        if versions == {new}:
            break
        assert time.monotonic() < deadline, (versions, daemon.log())
        time.sleep(0.5)
    old_rows = daemon.get_json("/api/v1/findings?include_superseded=1&rule=ti_ceiling")
    assert any(f["policy_version"] == old and f["superseded"]
               and f["study_instance_uid"] == tic for f in old_rows)
    # A broken policy: the old one stays, the error names file:line.
    with open(department["policy"], "a") as f:
        f.write("\n[rule ti_ceiling]\nlimit = high\n")
    mark = daemon.mark() if hasattr(daemon, "mark") else None
    daemon.process.send_signal(signal.SIGHUP)
    deadline = time.monotonic() + 20
    while "policy not reloaded" not in daemon.log():
        assert time.monotonic() < deadline, daemon.log()
        time.sleep(0.2)
    if mark is not None:
        daemon.allow_errors_since(mark)
    assert daemon.get_json("/api/v1/policy")["version"] == new


def test_planted_dwell_and_hot_preset_stand_out(department):
    """On top of a baseline that follows published audits (docs/demo.md,
    "Where the numbers come from"), the planted night-shift dwell and the
    hot preset are what the API puts first."""
    daemon, rows = department["daemon"], department["sim"]["rows"]
    night = set(planted(rows, "night-ob-dwell"))
    assert night
    dwell = daemon.get_json("/api/v1/findings?rule=dwell_obstetric_neonatal&limit=10000")
    found = {f["study_instance_uid"] for f in dwell}
    # docs/demo.md: every planted night exam breaches the BMUS obstetric
    # table (docs/domain.md section 4), and the night shift holds no other.
    assert night <= found
    at_night = daemon.get_json(
        "/api/v1/findings?rule=dwell_obstetric_neonatal&shift=night&limit=10000")
    assert {f["study_instance_uid"] for f in at_night} == night
    # The rest of the department breaches it in a few obstetric exams
    # (Butler et al., Ultrasound 2024: 7.02 %; at most 10.5 % here, as in
    # test_published_audits.py).
    obstetric = {r["study_instance_uid"] for r in rows
                 if r["exam_type"] in ("ob_early", "ob2", "ob3")} - night
    assert len(found - night) <= 0.105 * len(obstetric)

    # hot-preset: "Abdomen General" in US-ROOM-2 from day 8 (2026-11-09,
    # ISO week 46): its exams are the week's outliers by room.
    hot = set(planted(rows, "hot-preset"))
    assert hot
    week = daemon.get_json("/api/v1/outliers?week=2026-W46&group=room")
    outliers = {e["study_instance_uid"] for g in week["groups"] for e in g["exams"]
                if e["outlier"]}
    # most of them (an exam without Doppler can stay under the baseline P95)
    assert len(hot & outliers) >= 0.6 * len(hot), (len(hot & outliers), len(hot))
    # groups rank by their most severe finding, then by outlier count
    # (docs/api.md, GET /api/v1/outliers): Room 2 has the most outliers and
    # ranks first among the rooms whose worst finding is as severe as its own
    ranked = [(g["key"], g.get("worst_severity"), g["outlier_count"]) for g in week["groups"]]
    assert max(week["groups"], key=lambda g: g["outlier_count"])["key"] == "Room 2", ranked
    room2 = next(g for g in week["groups"] if g["key"] == "Room 2")
    peers = [g["key"] for g in week["groups"]
             if g.get("worst_severity") == room2.get("worst_severity")]
    assert peers[0] == "Room 2", ranked
