"""The review worklist and recorded reviews over a daemon fed by the
simulator (seed 2026, 21 days: 2026-11-02 to the night of 2026-11-22,
whose last exams fall on Monday 2026-11-23), served over HTTPS with a
password file holding a reviewer and a viewer.

Independent checks: the planted problems of docs/demo.md (the MI 2.1
equipment-limit breach on days 5, 12 and 19; the hot "Abdomen General"
preset of weeks 46-47; the night-shift obstetric dwell); ISO 8601 week
numbering recomputed with Python's datetime; the CSV export read back
with the csv module; SQLite itself refusing to change a recorded review;
and the pages in Debian's headless Chromium (tests/browser/review.mjs,
playwright-core).
"""
import base64
import csv
import datetime
import http.client
import io
import json
import os
import shutil
import ssl
import statistics
import subprocess
import urllib.parse

import pytest

from conftest import BINARY, REPO, Daemon, database_errors, run
from test_https import make_certificates

DAYS = 21
SEED = 2026
REVIEWER = ("lead", "harbour light 7")
VIEWER = ("guest", "quiet tern 3")
ACCESSION = "WV26112000417"
BROWSER_DIR = os.path.join(REPO, "tests", "browser")
OUT_DIR = os.path.join(REPO, "tests", "out")


def password_line(user, password, role=None):
    command = [BINARY, "passwd"] + (["--role", role] if role else []) + [user]
    result = subprocess.run(command, input=password + "\n", stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, timeout=30)
    assert result.returncode == 0, result.stderr
    return result.stdout.strip()


class Client:
    """HTTPS requests with Basic authentication (RFC 7617) and cookies."""

    def __init__(self, port, ca, user):
        self.port, self.user = port, user
        self.context = ssl.create_default_context(cafile=ca)
        self.cookies = {}

    def request(self, method, path, body=None, headers=None):
        connection = http.client.HTTPSConnection("127.0.0.1", self.port, context=self.context,
                                                 timeout=30)
        sent = dict(headers or {})
        token = base64.b64encode(("%s:%s" % self.user).encode()).decode()
        sent["Authorization"] = "Basic " + token
        if self.cookies and "Cookie" not in sent:
            sent["Cookie"] = "; ".join("%s=%s" % item for item in self.cookies.items())
        connection.request(method, path, body=body, headers=sent)
        response = connection.getresponse()
        data = response.read()
        for name, value in response.getheaders():
            if name.lower() == "set-cookie":
                key, _, rest = value.partition("=")
                self.cookies[key] = rest.split(";")[0]
        connection.close()
        return response.status, dict(response.getheaders()), data

    def json(self, path):
        status, _, data = self.request("GET", path)
        assert status == 200, data
        return json.loads(data)

    def post_review(self, fields, headers=None):
        sent = {"Content-Type": "application/x-www-form-urlencoded"}
        sent.update(headers or {})
        status, _, data = self.request("POST", "/api/v1/reviews",
                                       urllib.parse.urlencode(fields), sent)
        return status, json.loads(data)


@pytest.fixture(scope="module")
def department(tmp_path_factory):
    work = tmp_path_factory.mktemp("review")
    sim = os.path.join(str(work), "sim")
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED), "--out", sim],
                 timeout=300)
    assert result.returncode == 0, result.stderr
    # The MI breach exam of 2026-11-20 carries an Accession Number (the
    # simulator writes none), set with pydicom as a RIS would.
    import pydicom
    with open(os.path.join(sim, "manifest.csv"), newline="") as f:
        breach = [row["path"] for row in csv.DictReader(f)
                  if "mi-over-limit" in row["planted"] and "2026-11-20" in row["path"]]
    assert breach
    for path in breach:
        full = path if os.path.isabs(path) else os.path.join(sim, path)
        ds = pydicom.dcmread(full)
        ds.AccessionNumber = ACCESSION
        ds.save_as(full, write_like_original=False)
    ca, certificate, key = make_certificates(str(work))
    passwords = os.path.join(str(work), "passwords")
    with open(passwords, "w") as f:
        f.write(password_line(*REVIEWER, role="reviewer") + "\n")
        f.write(password_line(*VIEWER) + "\n")
    daemon = Daemon(work, http=dict(tls_certificate=certificate, tls_private_key=key,
                                    password_file=passwords))
    # The site records operators (the simulator writes Operators' Name).
    with open(os.path.join(REPO, "conf", "site.ini")) as f:
        site = f.read()
    assert "record_operator = no" in site
    site_path = os.path.join(str(work), "site.ini")
    with open(site_path, "w") as f:
        f.write(site.replace("record_operator = no", "record_operator = yes"))
    with open(daemon.config, "a") as f:
        f.write("[site]\nrules = %s\n" % site_path)
    imported = daemon.import_(sim)
    assert "imported" in imported.stdout, imported.stderr
    # The harness probes /healthz over plain HTTP: with HTTPS it waits on
    # C-ECHO and then on an HTTPS request of its own.
    daemon.get = lambda path, timeout=10: Client(daemon.http_port, ca, REVIEWER).request(
        "GET", path)[:3:2]
    daemon.start()
    daemon.ca = ca
    daemon.sim = sim
    yield daemon
    daemon.stop()


def iso_week(day):
    year, week, _ = datetime.date.fromisoformat(day).isocalendar()
    return "%d-W%02d" % (year, week)


def test_worklist_default_week_and_ranking(department):
    client = Client(department.http_port, department.ca, VIEWER)
    worklist = client.json("/api/v1/worklist")
    # The data ends on Monday 2026-11-23 (the last night shift): that week
    # is incomplete, so the last complete week with data is 2026-W47.
    assert worklist["data_last_day"] == "2026-11-23"
    assert worklist["week"] == "2026-W47" == iso_week(worklist["from"])
    assert (worklist["from"], worklist["to"]) == ("2026-11-16", "2026-11-22")
    assert worklist["default_week"] is True
    # Every week offered holds data (ISO 8601 Mondays of the exam days).
    with department.db() as db:
        days = [row[0] for row in db.execute(
            "SELECT DISTINCT substr(first_acquired_at, 1, 10) FROM exams "
            "WHERE first_acquired_at IS NOT NULL")]
    mondays = sorted({(datetime.date.fromisoformat(d) - datetime.timedelta(
        days=datetime.date.fromisoformat(d).weekday())).isoformat() for d in days})
    assert worklist["weeks_with_data"] == mondays
    findings = worklist["findings"]
    # docs/demo.md: MI 2.1 above the 1.9 equipment maximum on day 19 (2026-11-20).
    assert findings[0]["severity"] == "violation"
    assert findings[0]["rule_id"] == "equipment_maxima"
    assert findings[0]["measured_value"] == 2.1 and findings[0]["day"] == "2026-11-20"
    assert findings[0]["reason"] == "MI 2.1 displayed, above the limit 1.9"
    assert findings[0]["accession_number"] == ACCESSION  # as written with pydicom
    # Severity first (violation, warning, advisory), then size, largest first.
    order = {"violation": 3, "warning": 2, "advisory": 1}
    keys = [(order[f["severity"]], f["size"] if f["size"] is not None else -1) for f in findings]
    assert keys == sorted(keys, reverse=True)
    for f in findings:
        assert f["reason"] and f["room"] and "day" in f
    # Informational advisories (used below their own limit) only apart.
    assert worklist["counts"]["informational"] == len(worklist["informational"]) > 0
    for f in worklist["informational"]:
        assert f["severity"] == "advisory" and f["measured_value"] < f["limit_value"]
    assert not any(f["severity"] == "advisory" and f["measured_value"] is not None and
                   f["limit_value"] is not None and f["measured_value"] < f["limit_value"]
                   for f in findings)
    assert worklist["counts"]["open"] == len(findings)
    # A week without data is never the default; asking for one answers empty.
    empty = client.json("/api/v1/worklist?week=2026-W30")
    assert empty["exam_count"] == 0 and empty["findings"] == []


def test_every_default_week_is_the_worklists(department):
    # One rule for every page and report opened without a week or period:
    # the last complete ISO 8601 week that holds data (weeks recomputed
    # with Python's datetime). The data end on Monday 2026-11-23, a part
    # week of one night shift; the default is 2026-W47 everywhere.
    client = Client(department.http_port, department.ca, VIEWER)
    default = client.json("/api/v1/worklist")["week"]
    assert default == iso_week("2026-11-22") == "2026-W47"
    assert client.json("/api/v1/outliers")["week"] == default
    drift = client.json("/api/v1/drift")
    assert drift["last_week"] == default
    # The statistics with no period end on that week's Sunday.
    stats = client.json("/api/v1/stats")
    assert (stats["from"], stats["to"]) == ("2026-11-02", "2026-11-22")
    for command in (["week"], ["stats"]):
        out = os.path.join(department.workdir, "default.json")
        result = run([BINARY, "report"] + command + ["--config", department.config,
                                                     "--format", "json", "--output", out],
                     timeout=120)
        assert result.returncode == 0, result.stderr
        with open(out, encoding="utf-8") as f:
            document = json.load(f)
        if command == ["week"]:
            assert document["week"] == default
        else:
            assert document["to"] == "2026-11-22"
    # Drift is never shown, nor its largest |z| taken, from a week of
    # fewer exams than the page states (common practice, no source: a
    # median of 2 exams is no evidence of a changed preset).
    minimum = drift["minimum_week_exams"]
    assert minimum >= 5
    for series in drift["series"]:
        scored = [abs(p["z"]) for p in series["points"]
                  if p["z"] is not None and p["count"] >= minimum]
        assert series["max_abs_z"] == pytest.approx(max(scored, default=0.0), abs=0.06)
        for p in series["points"]:
            assert not p["flagged"] or p["count"] >= minimum


def test_baseline_says_its_real_span_and_count(department):
    # The 12 weeks before 2026-W47 reach back to 2026-08-24, but the data
    # begins on 2026-11-02: the baseline is two weeks (W45, W46) of exams.
    client = Client(department.http_port, department.ca, VIEWER)
    week = client.json("/api/v1/outliers?week=2026-W47&group=preset")
    assert week["baseline_weeks"] == 12 and week["baseline_from"] == "2026-08-24"
    with department.db() as db:
        days = [row[0] for row in db.execute(
            "SELECT substr(first_acquired_at, 1, 10) FROM exams WHERE first_acquired_at IS "
            "NOT NULL AND substr(first_acquired_at, 1, 10) BETWEEN '2026-08-24' AND '2026-11-15'")]
    assert week["baseline_data_from"] == min(days) == "2026-11-02"
    assert week["baseline_data_to"] == max(days) == "2026-11-15"
    assert week["baseline_weeks_with_data"] == len({iso_week(d) for d in days}) == 2
    assert week["baseline_exam_count"] == len(days)
    # The printed report says the same, not the 12 weeks asked for.
    out = os.path.join(department.workdir, "week.html")
    result = run([BINARY, "report", "week", "2026-W47", "--config", department.config,
                  "--format", "html", "--output", out], timeout=120)
    assert result.returncode == 0, result.stderr
    with open(out, encoding="utf-8") as f:
        html = f.read()
    assert "from 2026-11-02 to 2026-11-15 (2 weeks with data; %d exams)" % len(days) in html


def test_silent_probe_first_seen_beyond_look_back(department):
    # docs/demo.md: the L4-15 probe of US-ROOM-3 stops reporting on day 15
    # (2026-11-16); the page looks at the last 7 days of data (from
    # 2026-11-17 here), yet must say when the silence began.
    client = Client(department.http_port, department.ca, VIEWER)
    ingest = client.json("/api/v1/ingest")
    row = [r for r in ingest["not_reporting"] if r["transducer"] == "L4-15"][0]
    assert ingest["not_reporting_days"] == 7
    assert row["first_without_at"].startswith("2026-11-16"), row


def test_operator_view_against_python(department):
    client = Client(department.http_port, department.ca, VIEWER)
    answer = client.json("/api/v1/operators?from=2026-11-09&to=2026-11-15")
    assert answer["recorded"] is True and answer["operators"]
    # Recomputed from the database: each exam's first stored Operators'
    # Name and maximum governing index; medians by Python's statistics
    # module (the middle value, or the mean of the two middle ones).
    with department.db() as db:
        rows = db.execute(
            "SELECT e.study_instance_uid, CASE e.governing_index WHEN 'tis' THEN e.max_tis "
            "WHEN 'tib' THEN e.max_tib WHEN 'tic' THEN e.max_tic END, "
            "(SELECT operator_name FROM instances i WHERE i.study_instance_uid = "
            " e.study_instance_uid AND operator_name IS NOT NULL ORDER BY id LIMIT 1) "
            "FROM exams e WHERE substr(e.first_acquired_at, 1, 10) "
            "BETWEEN '2026-11-09' AND '2026-11-15'").fetchall()
    by_operator = {}
    for _, value, operator in rows:
        if operator is not None:
            by_operator.setdefault(operator, []).append(value)
    assert sorted(by_operator) == [o["operator"] for o in answer["operators"]]
    for o in answer["operators"]:
        values = [v for v in by_operator[o["operator"]] if v is not None]
        assert o["exam_count"] == len(by_operator[o["operator"]])
        assert o["valued_count"] == len(values)
        assert o["median_governing"] == pytest.approx(statistics.median(values))
    assert answer["exam_count"] == len(rows)


def test_reviews_need_reviewer_token_and_same_origin(department):
    reviewer = Client(department.http_port, department.ca, REVIEWER)
    viewer = Client(department.http_port, department.ca, VIEWER)
    worklist = reviewer.json("/api/v1/worklist?week=2026-W46")
    finding = worklist["findings"][0]
    session = reviewer.json("/api/v1/session")
    assert session["user"] == REVIEWER[0] and session["can_review"] is True
    assert "mitilog_review" in reviewer.cookies
    fields = dict(study=finding["study_instance_uid"], finding=finding["id"],
                  outcome="discussed_with_operator", comment='Told the sonographer; "B-mode only"')
    # No token: refused (common practice, no source: synchronizer token).
    status, body = reviewer.post_review(fields)
    assert status == 403 and "token" in body["error"]
    # Another site's page: refused by Origin and by Sec-Fetch-Site (Fetch
    # standard, request metadata), token or not.
    with_token = dict(fields, csrf_token=session["csrf_token"])
    status, _ = reviewer.post_review(with_token, {"Origin": "https://elsewhere.example"})
    assert status == 403
    status, _ = reviewer.post_review(with_token, {"Sec-Fetch-Site": "cross-site"})
    assert status == 403
    # Token without the SameSite cookie (a request a browser starts from
    # another site does not carry it): refused.
    status, _ = reviewer.post_review(with_token, {"Cookie": "other=1"})
    assert status == 403
    # A viewer, even with a token of its own: refused.
    viewer_session = viewer.json("/api/v1/session")
    assert viewer_session["role"] == "viewer" and viewer_session["can_review"] is False
    status, body = viewer.post_review(dict(fields, csrf_token=viewer_session["csrf_token"]))
    assert status == 403 and "viewer" in body["error"]
    # Bad outcome and unknown finding: 400 and 404, nothing written.
    status, _ = reviewer.post_review(dict(with_token, outcome="fine"))
    assert status == 400
    status, _ = reviewer.post_review(dict(with_token, finding=99999999))
    assert status == 404
    # The reviewer with token and cookie: recorded, then a second act.
    status, history = reviewer.post_review(with_token)
    assert status == 200, history
    status, history = reviewer.post_review(dict(with_token, outcome="acceptable", comment="ok"))
    assert status == 200
    mine = [r for r in history if r["finding_id"] == finding["id"]]
    assert [r["outcome"] for r in mine] == ["discussed_with_operator", "acceptable"]
    assert mine[0]["comment"] == fields["comment"] and mine[0]["reviewer"] == REVIEWER[0]
    # The worklist shows it no longer open.
    again = reviewer.json("/api/v1/worklist?week=2026-W46")
    row = [f for f in again["findings"] if f["id"] == finding["id"]][0]
    assert row["open"] is False and row["review"]["outcome"] == "acceptable"
    assert again["counts"]["open"] == worklist["counts"]["open"] - 1
    # Append-only: the database refuses to change or delete a recorded review.
    db = department.db(write=True)
    for statement in ("UPDATE reviews SET outcome = 'acceptable'", "DELETE FROM reviews"):
        with pytest.raises(database_errors(), match="append-only"):
            db.execute(statement)
        db.rollback()
    db.close()
    # CSV export read back with the csv module (RFC 4180) equals the JSON.
    status, headers, data = reviewer.request("GET", "/api/v1/reviews?format=csv")
    assert status == 200 and headers["Content-Type"].startswith("text/csv")
    rows = list(csv.DictReader(io.StringIO(data.decode("utf-8"), newline="")))
    as_json = reviewer.json("/api/v1/reviews")
    assert [r["comment"] for r in rows] == [r["comment"] for r in as_json]
    assert [int(r["finding_id"]) for r in rows] == [r["finding_id"] for r in as_json]


def test_review_in_chromium(department, tmp_path):
    node = shutil.which("node")
    have = node and os.path.exists("/usr/bin/chromium") and os.path.isdir(
        os.path.join(BROWSER_DIR, "node_modules", "playwright-core"))
    if not have:
        if os.environ.get("MITILOG_REQUIRE_BROWSER"):
            pytest.fail("node, /usr/bin/chromium or tests/browser/node_modules missing")
        pytest.skip("node, chromium or playwright-core (npm ci in tests/browser) missing")
    url = "https://127.0.0.1:%d" % department.http_port
    # Another site's page that posts a review form to mitilog on load.
    cross_site = os.path.join(str(tmp_path), "elsewhere.html")
    with open(cross_site, "w") as f:
        f.write('<!DOCTYPE html><html><body><form id="f" method="post" action="%s/api/v1/reviews">'
                '<input name="finding" value="1"><input name="outcome" value="acceptable">'
                '<input name="comment" value="posted by another site"></form>'
                '<script>document.getElementById("f").submit();</script></body></html>' % url)
    # An exam of the silent probe (docs/demo.md: L4-15 in US-ROOM-3 from
    # 2026-11-16): no index at all, so its exposure is unknown, not 0.
    with department.db() as db:
        silent = db.execute(
            "SELECT study_instance_uid FROM exams WHERE max_mi IS NULL AND max_tis IS NULL AND "
            "max_tib IS NULL AND max_tic IS NULL AND capture_count > 0 AND "
            "first_acquired_at >= '2026-11-16' ORDER BY first_acquired_at LIMIT 1").fetchone()[0]
    out = os.path.join(OUT_DIR, "browser-review-" + os.path.basename(os.path.dirname(BINARY)))
    config = dict(url=url, out=out, reviewer=list(REVIEWER), viewer=list(VIEWER),
                  hot_preset="Abdomen General", night_shift="night", cross_site_page=cross_site,
                  accession=ACCESSION, silent_study=silent)
    # GnuTLS (through libmicrohttpd) notes Chromium's TLS 1.3 key updates
    # and closes as "received handshake message out of context"; the
    # pages are checked below, the note is not a failure.
    department.allowed_error_patterns.append(r"http: Error: received handshake message out of context")
    config_path = os.path.join(str(tmp_path), "review.json")
    with open(config_path, "w") as f:
        json.dump(config, f)
    result = subprocess.run([node, os.path.join(BROWSER_DIR, "review.mjs"), config_path],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            timeout=180, cwd=BROWSER_DIR)
    lines = [line for line in result.stdout.splitlines() if line.startswith("{")]
    assert lines, result.stderr
    outcome = json.loads(lines[-1])
    failed = [c for c in outcome["checks"] if not c["ok"]]
    assert not failed and not outcome["errors"], (failed, outcome["errors"])
    assert result.returncode == 0
