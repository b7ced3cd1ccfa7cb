"""The demo path, shortened: the simulator streams three days of traffic
through DCMTK's storescu to a test daemon, and the API shows every
instance exactly once (the resent study replaced, not duplicated); and
the demo's screen set-up (deploy/demo_devices.py) on two days of screens:
values read from the pixels, mismatch findings, a software update that
stops a profile until the device is learned again, the dashboard's
provenance and refused frames."""
import csv
import json
import os
import re
import shutil
import subprocess
import sys
import time

import pydicom

from conftest import AE_TITLE, BINARY, DCMTK_ENV, REPO


def test_simulated_days_reach_the_api_once_each(daemon_factory, tmp_path):
    daemon = daemon_factory().start()
    out = tmp_path / "sim"
    result = subprocess.run(
        [BINARY, "simulate", "--days", "3", "--seed", "11", "--out", str(out),
         "--send", "127.0.0.1:%d" % daemon.dicom_port,
         "--called-aet", AE_TITLE, "--speed", "0"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        timeout=600, env=DCMTK_ENV)
    assert result.returncode == 0, result.stdout[-2000:] + result.stderr[-2000:]

    # reference: pydicom, an independent parser, lists what was written
    written = set()
    for folder, _, names in os.walk(out):
        for name in names:
            if name.endswith(".dcm"):
                dataset = pydicom.dcmread(os.path.join(folder, name),
                                          stop_before_pixels=True)
                written.add(str(dataset.SOPInstanceUID))
    assert len(written) > 1000   # three weekdays of the department

    stored = daemon.get_json("/api/v1/instances?since=2000-01-01&limit=10000")
    uids = [row["sop_instance_uid"] for row in stored]
    assert len(uids) == len(set(uids)), "an instance appears twice"
    assert set(uids) == written

    # The simulator resends one study on day 3 (docs/demo.md, planted
    # problem 6): its instances were replaced, each counted once.
    with open(out / "manifest.csv", newline="") as f:
        resent = {row["sop_instance_uid"] for row in csv.DictReader(f)
                  if "resend" in row["planted"]}
    assert resent, "the manifest names the resent study"
    replaced = {row["sop_instance_uid"] for row in stored
                if row["replaced_count"] >= 1}
    assert resent <= replaced
    with daemon.db() as db:
        (count,) = db.execute("SELECT count(*) FROM instances").fetchone()
    assert count == len(written)


def test_screen_department_reaches_the_api(daemon_factory, tmp_path):
    """The demo's department (`--screens --compress`): storescu sends the
    JPEG baseline, JPEG-LS and RLE images (with -R and the matching -x
    option) and the daemon stores every instance; the pixels-only room's
    images carry no header indices, the others carry the values the
    manifest says were drawn (reference: the simulator's manifest.csv and
    pydicom reading the files)."""
    daemon = daemon_factory().start()
    out = tmp_path / "sim"
    result = subprocess.run(
        [BINARY, "simulate", "--days", "1", "--seed", "11", "--out", str(out),
         "--screens", "--compress",
         "--send", "127.0.0.1:%d" % daemon.dicom_port,
         "--called-aet", AE_TITLE, "--speed", "0"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        timeout=900, env=DCMTK_ENV)
    assert result.returncode == 0, result.stdout[-2000:] + result.stderr[-2000:]
    with open(out / "manifest.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    syntaxes = {row["transfer_syntax"] for row in rows}
    assert {"1.2.840.10008.1.2.4.50", "1.2.840.10008.1.2.4.80",
            "1.2.840.10008.1.2.5"} <= syntaxes
    stored = {row["sop_instance_uid"]: row for row in
              daemon.get_json("/api/v1/instances?since=2000-01-01&limit=10000")}
    assert set(stored) == {row["sop_instance_uid"] for row in rows}
    pixels_only = [row for row in rows if row["device"] == "northmere-nm3"]
    assert pixels_only and all(row["header_indices"] == "0" for row in pixels_only)
    for row in pixels_only[:5]:
        dataset = pydicom.dcmread(os.path.join(str(out), row["path"]),
                                  stop_before_pixels=True)
        assert "MechanicalIndex" not in dataset and row["mi_text"]
        assert stored[row["sop_instance_uid"]]["mi"] is None
    # a scanner writing both: the API's header MI is the value drawn
    # (unless the planted stale header is on that capture)
    both = [row for row in rows if row["device"] == "ambervale-av62" and row["mi_text"]
            and "header-mismatch" not in row["planted"]]
    assert both
    for row in both[:20]:
        assert stored[row["sop_instance_uid"]]["mi"] == float(row["mi_text"].split()[-1])


def _wait_for_readings(daemon, limit_seconds=900):
    """Until the reading queue is empty (the daemon reads after it answers
    each C-STORE): a wait, not a timed assertion."""
    deadline = time.monotonic() + limit_seconds
    while time.monotonic() < deadline:
        with daemon.db() as db:
            (queued,) = db.execute("SELECT count(*) FROM reading_queue").fetchone()
        if queued == 0:
            return
        time.sleep(1)
    raise AssertionError("the reading queue did not empty")


def _drawn_value(text):
    """The number of a drawn index text such as 'MI 1.2', 'TIs0.4'."""
    match = re.search(r"([0-9]+\.[0-9]+)$", text)
    return match.group(1) if match else None


def _browser_checks(daemon, tmp_path, pages):
    """The Devices page and the exam page's provenance table in Debian's
    headless Chromium (tests/browser/screens.mjs, playwright-core)."""
    node = shutil.which("node")
    browser_dir = os.path.join(REPO, "tests", "browser")
    if not (node and os.path.exists("/usr/bin/chromium") and os.path.isdir(
            os.path.join(browser_dir, "node_modules", "playwright-core"))):
        assert not os.environ.get("MITILOG_REQUIRE_BROWSER"), \
            "node, /usr/bin/chromium or tests/browser/node_modules missing"
        return
    config = dict(pages, url="http://127.0.0.1:%d" % daemon.http_port,
                  out=os.path.join(REPO, "tests", "out",
                                   "browser-screens-" + os.path.basename(os.path.dirname(BINARY))))
    config_path = os.path.join(str(tmp_path), "screens.json")
    with open(config_path, "w") as f:
        json.dump(config, f)
    result = subprocess.run([node, os.path.join(browser_dir, "screens.mjs"), config_path],
                            capture_output=True, text=True, timeout=120, cwd=browser_dir)
    lines = [line for line in result.stdout.splitlines() if line.startswith("{")]
    assert lines, result.stderr
    outcome = json.loads(lines[-1])
    failed = [c for c in outcome["checks"] if not c["ok"]]
    assert not failed and not outcome["errors"], (failed, outcome["errors"])
    assert result.returncode == 0 and len(outcome["checks"]) == 12


def test_demo_sets_up_the_scanners_and_reads_their_screens(daemon_factory, tmp_path):
    """The demo's steps on two days (deploy/demo.sh): the daemon runs, the
    administrator script (deploy/demo_devices.py) learns and activates a
    profile per simulated scanner from images the simulator wrote (values
    typed from the manifest for the pixels-only room), the traffic is sent
    with storescu. Reference: the simulator's manifest.csv (what each
    screen drew) and pydicom reading the headers.
    - the pixels-only room's captures carry values with source "pixels",
      equal to the text drawn;
    - US-ROOM-2's planted stale headers are header_screen_mismatch findings;
    - after US-ROOM-1's software update its captures are "not read" with
      the reason (counted against its old profile on GET /api/v1/devices),
      never read with the old profile; once a profile is learned for the
      new software, `rescore --read-pixels` reads them (retention full)."""
    daemon = daemon_factory(storage=dict(retention="full"))
    out = tmp_path / "sim"
    simulate = [BINARY, "simulate", "--days", "2", "--seed", "11", "--out", str(out),
                "--screens", "--compress"]
    result = subprocess.run(simulate, capture_output=True, text=True, timeout=900)
    assert result.returncode == 0, result.stderr[-2000:]
    helper = [sys.executable, os.path.join(REPO, "deploy", "demo_devices.py")]
    learned = subprocess.run(
        helper + ["learn", "--binary", BINARY, "--config", daemon.config,
                  "--images", str(out), "--skip", "ambervale-av40-4.1.0", "--allow-refused"],
        capture_output=True, text=True, timeout=600)
    assert learned.returncode == 0, learned.stdout + learned.stderr
    assert "northmere-nm3 (US-ROOM-4) learned" in learned.stdout, learned.stdout
    assert "typed from the simulator's manifest" in learned.stdout
    assert "northmere-nm7 (US-ROOM-2) learned" in learned.stdout, learned.stdout
    assert "ambervale-av40-4.0.2 (US-ROOM-1) learned" in learned.stdout, learned.stdout

    daemon.start()
    result = subprocess.run(
        simulate + ["--send", "127.0.0.1:%d" % daemon.dicom_port, "--called-aet", AE_TITLE,
                    "--speed", "0"],
        capture_output=True, text=True, timeout=900, env=DCMTK_ENV)
    assert result.returncode == 0, result.stdout[-2000:] + result.stderr[-2000:]
    _wait_for_readings(daemon)
    with open(out / "manifest.csv", newline="") as f:
        rows = [row for row in csv.DictReader(f) if row["matrix"]]
    stored = {row["sop_instance_uid"]: row for row in
              daemon.get_json("/api/v1/instances?since=2000-01-01&limit=10000")}

    # The pixels-only room: every index drawn is read, from the pixels.
    pixels_only = [row for row in rows if row["device"] == "northmere-nm3"]
    assert len(pixels_only) > 100
    checked = 0
    for row in pixels_only:
        indices = stored[row["sop_instance_uid"]]["indices"]
        for name in ("mi", "tis", "tib", "tic"):
            text = _drawn_value(row[name + "_text"])
            if text is None:
                continue
            assert indices[name]["source"] == "pixels", (row["path"], name, indices[name])
            assert indices[name]["screen"]["text"] == text, (row["path"], name)
            assert indices[name]["value"] == float(text)
            checked += 1
    assert checked >= 2 * len(pixels_only)

    # US-ROOM-2's stale headers (planted): a mismatch finding names each
    # capture whose header (read with pydicom) differs from the drawn text
    # by more than the screen's rounding.
    findings = daemon.get_json("/api/v1/findings?rule=header_screen_mismatch")
    named = {uid for finding in findings for uid in finding["instance_uids"]}
    planted = [row for row in rows if "header-mismatch" in row["planted"]]
    assert planted
    differing = 0
    for row in planted:
        dataset = pydicom.dcmread(os.path.join(str(out), row["path"]), stop_before_pixels=True)
        header = {"mi": dataset.get("MechanicalIndex"),
                  "tis": dataset.get("SoftTissueThermalIndex"),
                  "tib": dataset.get("BoneThermalIndex"),
                  "tic": dataset.get("CranialThermalIndex")}
        for name, value in header.items():
            text = _drawn_value(row[name + "_text"])
            if value is None or text is None:
                continue
            decimals = len(text.split(".")[1])
            if abs(float(value) - float(text)) > 0.5 * 10 ** -decimals + 1e-9:
                differing += 1
                mismatch_study = row["study_instance_uid"]
                assert row["sop_instance_uid"] in named, row["path"]
                break
    assert differing > 0
    assert all(finding["rule_id"] == "header_screen_mismatch" for finding in findings)

    # US-ROOM-1 after its software update: not read, with the reason; the
    # old profile says how many of its frames it refused and why.
    updated = [row for row in rows if row["device"] == "ambervale-av40-4.1.0"]
    assert updated
    for row in updated:
        instance = stored[row["sop_instance_uid"]]
        reading = instance["screen_reading"]
        assert reading["state"] == "not_read", row["path"]
        assert reading["reason"].startswith("software changed: the device now runs 4.1.0"), \
            reading["reason"]
        assert all(instance["indices"][name]["source"] in ("header", None)
                   for name in ("mi", "tis", "tib", "tic"))
    devices = {(d["key"], d["version"]): d for d in daemon.get_json("/api/v1/devices")}
    old = devices[("ambervale-av40-4.0.2", 1)]
    assert old["recent_refused"] == len(updated)
    assert old["refused_reason_frames"] == len(updated)
    assert old["refused_reason"].startswith("software changed")
    assert old["recent_frames"] == len(
        [row for row in rows if row["device"].startswith("ambervale-av40")])
    assert devices[("northmere-nm3", 1)]["recent_refused"] == 0
    with open(daemon.stderr_path) as f:
        warnings = [line for line in f if "screen profile ambervale-av40-4.0.2 refuses" in line]
    assert len(warnings) == 1   # once an hour, not once a frame
    # An index an exam does not show (blank on that frame) is no refusal:
    # the maternity scanner refuses nothing and is never warned about.
    assert devices[("mitilog-sim-us-5", 1)]["recent_refused"] == 0
    with open(daemon.stderr_path) as f:
        assert not [line for line in f if "refuses frames" in line
                    and "ambervale-av40-4.0.2" not in line]

    first = pixels_only[0]
    _browser_checks(daemon, tmp_path, dict(
        pixels_study=first["study_instance_uid"],
        pixels_text="%s · screen" % _drawn_value(first["mi_text"]),
        updated_study=updated[0]["study_instance_uid"], mismatch_study=mismatch_study,
        refused_profile="ambervale-av40-4.0.2",
        refused_text="software changed: %d of %d frames" % (len(updated),
                                                            old["recent_frames"])))

    # A profile for the new software; the objects kept are read again.
    learned = subprocess.run(
        helper + ["learn", "--binary", BINARY, "--config", daemon.config,
                  "--images", str(out), "--only", "ambervale-av40-4.1.0"],
        capture_output=True, text=True, timeout=600)
    assert learned.returncode == 0, learned.stdout + learned.stderr
    daemon.stop()
    result = subprocess.run([BINARY, "rescore", "--config", daemon.config, "--read-pixels"],
                            capture_output=True, text=True, timeout=900)
    assert result.returncode == 0, result.stderr[-2000:]
    daemon.returncode = None
    daemon.start()
    stored = {row["sop_instance_uid"]: row for row in
              daemon.get_json("/api/v1/instances?since=2000-01-01&limit=10000")}
    for row in updated:
        instance = stored[row["sop_instance_uid"]]
        assert instance["screen_reading"]["state"] == "read", instance["screen_reading"]
        assert instance["screen_reading"]["profile_key"] == "ambervale-av40-4.1.0"
        text = _drawn_value(row["mi_text"])
        if text is not None:
            assert instance["indices"]["mi"]["source"] == "both"
            assert instance["indices"]["mi"]["screen"]["text"] == text
