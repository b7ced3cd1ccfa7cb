"""The exam vocabulary seen from outside: what the dashboard draws comes
from the API (the policy's limits per group and age group, the TI ladder,
the exam's group), and the time at or above each threshold of the ladder
is kept as rows that the store rebuilds when the ladder it finds in the
database is not its own.

Expected values are read with independent readers: the policy and site
files with Python's configparser (conf/policy.ini, conf/site.ini), the
times at or above with a query of the exam timeline written here.
"""
import configparser
import os

import pytest

from conftest import BINARY, REPO, Daemon, run

DAYS = 2
SEED = 4


def ini(name):
    parser = configparser.ConfigParser(interpolation=None, strict=False)
    with open(os.path.join(REPO, "conf", name)) as f:
        parser.read_file(f)
    return parser


@pytest.fixture(scope="module")
def imported(tmp_path_factory):
    work = tmp_path_factory.mktemp("vocabulary")
    sim = os.path.join(str(work), "sim")
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED), "--out", sim],
                 timeout=300)
    assert result.returncode == 0, result.stderr
    os.unlink(os.path.join(sim, "manifest.csv"))
    daemon = Daemon(work)
    result = daemon.import_(sim)
    assert result.returncode == 0, result.stdout + result.stderr
    daemon.start()
    yield daemon
    daemon.stop()


def dwell_table(section):
    """The dwell.T = MINUTES keys of a policy rule: {T: minutes or None}."""
    return {float(key[len("dwell."):]): (None if value.strip() == "not_recommended"
                                         else float(value))
            for key, value in section.items() if key.startswith("dwell.")}


def test_policy_limits_are_the_policy_files(imported):
    """docs/policy.md: dwell_general for exams outside the obstetric and
    neonatal groups and neonates, dwell_obstetric_neonatal for those;
    ti_ceiling 2.0, 1.0 for ophthalmic; equipment MI 1.9, 0.23 ophthalmic."""
    policy = ini("policy.ini")
    document = imported.get_json("/api/v1/policy")
    limits = {(entry["group"], entry["age_group"]): entry for entry in document["limits"]}
    groups = ("general", "obstetric", "neonatal", "transcranial", "ophthalmic", "contrast")
    assert set(limits) == {(g, a) for g in groups for a in ("adult", "child", "neonate")}
    general = dwell_table(policy["rule dwell_general"])
    obstetric = dwell_table(policy["rule dwell_obstetric_neonatal"])
    for (group, age), entry in limits.items():
        expected_rule = ("dwell_obstetric_neonatal"
                         if group in ("obstetric", "neonatal") or age == "neonate"
                         else "dwell_general")
        assert entry["dwell_rule"] == expected_rule, (group, age)
        table = obstetric if expected_rule == "dwell_obstetric_neonatal" else general
        got = {step["threshold"]: (None if step["not_recommended"] else step["minutes"])
               for step in entry["dwell"]}
        assert got == table, (group, age)
        ti = policy["rule ti_ceiling"]
        assert entry["ti_ceiling"] == float(ti.get("limit.group." + group, ti["limit"]))
        equipment = policy["rule equipment_maxima"]
        assert entry["mi_equipment"] == float(equipment.get("mi_limit.group." + group,
                                                            equipment["mi_limit"]))


def test_ladder_is_the_measurements_keys(imported):
    """The ladder the policy document gives is the thresholds of every
    study's measured time at or above (docs/api.md)."""
    ladder = imported.get_json("/api/v1/policy")["ti_ladder"]
    assert ladder == sorted(ladder) and len(ladder) >= 4
    studies = imported.get_json("/api/v1/studies")
    assert studies
    for study in studies[:10]:
        detail = imported.get_json("/api/v1/studies/" + study["study_instance_uid"])
        keys = detail["measurements"]["seconds_at_or_above"]
        assert [float(k) for k in keys] == ladder
    # the statistics report the ladder's first four
    stats = imported.get_json("/api/v1/stats")
    assert [t["threshold"] for t in stats["total"]["time_at_or_above"]] == ladder[:4]


def test_study_group_is_the_site_exam_type_group(imported):
    """A study's group is its exam type's group key in conf/site.ini (the
    dashboard no longer guesses it from the exam type's name)."""
    site = ini("site.ini")
    seen = set()
    for study in imported.get_json("/api/v1/studies"):
        detail = imported.get_json("/api/v1/studies/" + study["study_instance_uid"])
        key = detail["exam_type"]
        if key is None:
            assert detail["group"] == "general"
            continue
        section = site["exam_type " + key]
        expected = section.get("group") or ("obstetric" if section.get("obstetric", "no")
                                            .strip().lower() in ("yes", "true", "1")
                                            else "general")
        assert detail["group"] == expected, key
        seen.add(expected)
    assert {"obstetric", "general"} <= seen


# The time at or above each threshold, summed from the timeline here.
ORACLE = """
SELECT tl.study_instance_uid, t.threshold,
       sum(iif(CASE e.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                      WHEN 'tic' THEN i.tic END >= t.threshold,
               tl.attributed_seconds, 0))
FROM exams e
JOIN exam_timeline tl ON tl.study_instance_uid = e.study_instance_uid
JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
CROSS JOIN ti_thresholds t
GROUP BY tl.study_instance_uid, t.threshold
ORDER BY 1, 2
"""


def test_changed_ladder_is_recomputed(imported):
    """A database whose ladder and mode names are not the binary's (a
    threshold missing, the times lost, a mode renamed) is brought back at
    the next start: the binary's ladder, every exam's times recomputed from
    its timeline, the binary's mode names (docs/api.md: "2d" for bit 0,
    PS3.3 C.8.5.6.1.1 order)."""
    with imported.db() as db:
        modes = db.execute("SELECT rank, mode FROM mode_names ORDER BY rank").fetchall()
        ladder = [row[0] for row in db.execute(
            "SELECT threshold FROM ti_thresholds ORDER BY threshold")]
        before = db.execute("SELECT * FROM exam_time_at_or_above ORDER BY 1, 2, 3").fetchall()
        exams = db.execute("SELECT count(*) FROM exams").fetchone()[0]
    assert len(before) == exams * len(ladder)
    imported.stop()
    db = imported.db(write=True)
    db.execute("DELETE FROM ti_thresholds WHERE threshold = ?", (ladder[-1],))
    db.execute("DELETE FROM exam_time_at_or_above")
    db.execute("UPDATE mode_names SET mode = 'b-mode' WHERE rank = 0")
    db.commit()
    db.close()
    imported.process = None
    imported.returncode = None
    imported.start()
    with imported.db() as db:
        assert [row[0] for row in db.execute(
            "SELECT threshold FROM ti_thresholds ORDER BY threshold")] == ladder
        after = db.execute("SELECT * FROM exam_time_at_or_above ORDER BY 1, 2, 3").fetchall()
        oracle = db.execute(ORACLE).fetchall()
        assert db.execute("SELECT rank, mode FROM mode_names ORDER BY rank").fetchall() == modes
    assert modes[0] == (0, "2d")
    if imported.engine == "sqlite":
        assert after == before
    else:
        # PostgreSQL adds a sum's terms in the order of its plan: the same
        # times, to the last bits of a double (IEEE 754 addition is not
        # associative)
        assert [row[:3] for row in after] == [row[:3] for row in before]
        assert [row[3] for row in after] == pytest.approx([row[3] for row in before], abs=1e-9)
    timed = {(uid, threshold): seconds for _, uid, threshold, seconds in after}
    for uid, threshold, seconds in oracle:
        assert timed[(uid, threshold)] == pytest.approx(seconds, abs=1e-9)
