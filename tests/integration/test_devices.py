"""Setting up a device's screen profile the way an administrator does:
`mitilog device learn` from frames drawn by PIL (tests/fixtures/screens.py:
the text drawn is the truth), `show`, `list`, `activate`, `retire`, and the
dashboard's data: GET /api/v1/devices and the example frame it was learned
from (GET /api/v1/devices/example), compared pixel for pixel with the
file as PIL wrote it (PIL is the outside reader)."""
import io
import json
import os
import subprocess
import sys
import urllib.error
import urllib.request

from PIL import Image

from conftest import BINARY, REPO

sys.path.insert(0, os.path.join(REPO, "tests", "fixtures"))
import screens  # noqa: E402


def run(*arguments):
    return subprocess.run([BINARY, *arguments], capture_output=True, text=True, timeout=120)


def fetch(daemon, path):
    url = "http://127.0.0.1:%d%s" % (daemon.http_port, path)
    try:
        with urllib.request.urlopen(url, timeout=10) as response:
            return response.status, response.headers.get("Content-Type"), response.read()
    except urllib.error.HTTPError as error:
        return error.code, error.headers.get("Content-Type"), error.read()


def learning_frames(folder):
    import random
    return screens.learning_frames("harbor", screens.DESIGNS["harbor"], random.Random(7),
                                   str(folder))


def test_learn_activate_and_dashboard(daemon_factory, tmp_path):
    daemon = daemon_factory()
    frames = learning_frames(tmp_path)
    command = ["device", "learn", "--config", daemon.config, "--key", "room-3-scanner",
               "--manufacturer", "Harbor Imaging Works", "--model", "HW-1"]
    for path, values in frames:
        command += ["--value", "%s:%s" % (path, screens.labels_of(values, 1))]
    command += [path for path, _ in frames]
    result = run(*command)
    assert result.returncode == 0, result.stderr
    assert "read back all 2 examples exactly" in result.stdout
    assert "version 1 as proposed" in result.stdout

    # Proposed: in the list, not yet active (common practice, no source).
    listed = json.loads(run("device", "list", "--config", daemon.config).stdout)
    assert [(p["key"], p["version"], p["state"]) for p in listed] == [
        ("room-3-scanner", 1, "proposed")]
    assert listed[0]["manufacturer"] == "Harbor Imaging Works"
    assert (listed[0]["columns"], listed[0]["rows"]) == screens.DESIGNS["harbor"]["size"]

    result = run("device", "activate", "--config", daemon.config, "--by", "a.admin",
                 "room-3-scanner")
    assert result.returncode == 0, result.stderr
    shown = run("device", "show", "--config", daemon.config, "room-3-scanner").stdout
    assert shown.startswith("# room-3-scanner version 1, active")
    assert "\nmitilog-screen-profile 1\n" in shown
    with daemon.db() as db:
        row = db.execute("SELECT state, confirmed_by, confirmed_at IS NOT NULL "
                         "FROM screen_profiles").fetchone()
    assert row == ("active", "a.admin", 1)

    daemon.start()
    devices = daemon.get_json("/api/v1/devices")
    assert devices[0]["state"] == "active"
    assert devices[0]["has_example"] == 1
    assert "slot mi " in devices[0]["profile_text"]

    status, content_type, body = fetch(daemon, "/api/v1/devices/example?key=room-3-scanner")
    assert status == 200 and content_type == "image/x-portable-graymap"
    served = Image.open(io.BytesIO(body))
    drawn = Image.open(frames[0][0])
    assert served.size == drawn.size and served.tobytes() == drawn.tobytes()

    # Unknown key, bad version: 404 and 400 naming the problem.
    status, _, body = fetch(daemon, "/api/v1/devices/example?key=nothing-here")
    assert status == 404 and b"no screen profile nothing-here" in body
    status, _, body = fetch(daemon, "/api/v1/devices/example?key=room-3-scanner&version=x")
    assert status == 400 and b"version" in body
    status, _, body = fetch(daemon, "/api/v1/devices/example")
    assert status == 400 and b"key" in body

    # The Devices page is served with the dashboard.
    status, _, body = fetch(daemon, "/devices.html")
    assert status == 200 and b"devices.js" in body

    result = run("device", "retire", "--config", daemon.config, "room-3-scanner")
    assert result.returncode == 0, result.stderr
    assert daemon.get_json("/api/v1/devices")[0]["state"] == "retired"


def test_learn_refuses_with_reasons(daemon_factory, tmp_path):
    daemon = daemon_factory()
    (path_a, values_a), (path_b, _) = learning_frames(tmp_path)
    assert values_a == {"MI": 1.2, "TIS": 3.4, "TIB": 5.6}
    # No values for a PGM frame.
    result = run("device", "learn", "--config", daemon.config, "--key", "k", path_a)
    assert result.returncode == 2 and "no values for" in result.stderr
    # Without TIB's values, 5 and 6 are never seen.
    result = run("device", "learn", "--config", daemon.config, "--key", "k",
                 "--value", "%s:MI=1.2,TIS=3.4" % path_a,
                 "--value", "%s:MI=0.7,TIS=8.9" % path_b, path_a, path_b)
    assert result.returncode == 1 and "every digit (missing: 5 6" in result.stderr
    # A value of an index the screen does not show.
    result = run("device", "learn", "--config", daemon.config, "--key", "k",
                 "--value", "%s:%s,TIC=2.2" % (path_a, screens.labels_of(values_a, 1)),
                 "--value", "%s:MI=0.7,TIS=8.9,TIB=0.8" % path_b, path_a, path_b)
    assert result.returncode == 1 and "TIC was given a value but not placed" in result.stderr
    # Not a frame at all.
    bogus = tmp_path / "bogus.pgm"
    bogus.write_bytes(b"hello")
    result = run("device", "learn", "--config", daemon.config, "--key", "k", str(bogus))
    assert result.returncode == 2 and "neither an 8-bit binary PGM file" in result.stderr
    # Nothing was stored.
    assert json.loads(run("device", "list", "--config", daemon.config).stdout) == []
