"""The demo path, shortened: the simulator streams three days of traffic
through DCMTK's storescu to a test daemon, and the API shows every
instance exactly once (the resent study replaced, not duplicated)."""
import csv
import os
import subprocess

import pydicom

from conftest import AE_TITLE, BINARY, DCMTK_ENV


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
