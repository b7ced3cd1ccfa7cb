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
