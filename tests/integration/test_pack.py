"""The printed statistics document (`report stats --format html`) and the
printed week report, over a daemon fed the demo's simulated department
(seed 2026, 28 days = ISO weeks 45-48 of 2026, as deploy/demo.sh sends).

Independent checks: Python's statistics module (median, quantiles with
method='inclusive', Hyndman & Fan type 7) recomputed on the exam values the
API serves; the document read with Python's html.parser, the CSV with the
csv module, the JSON with the json module; the HTML printed to PDF by
Debian's headless Chromium, its pages counted by poppler's pdfinfo and
rendered to PNG by pdftoppm (poppler-utils).
"""
import collections
import csv
import glob
import html.parser
import io
import json
import os
import shutil
import statistics
import subprocess
import tempfile

import pytest

from conftest import BINARY, REPO, Daemon, run

DAYS = 28
SEED = 2026
FROM, TO = "2026-11-02", "2026-11-29"
INSTITUTION = "Northfield General Hospital & Clinics"
OUT_DIR = os.path.join(REPO, "tests", "out")


@pytest.fixture(scope="module")
def department(tmp_path_factory):
    work = tmp_path_factory.mktemp("pack")
    sim = os.path.join(str(work), "sim")
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED), "--out", sim],
                 timeout=600)
    assert result.returncode == 0, result.stderr
    daemon = Daemon(work)
    with open(daemon.config, "a") as f:
        f.write("[site]\ninstitution = %s\n" % INSTITUTION)
    imported = daemon.import_(sim)
    assert "imported" in imported.stdout, imported.stderr
    daemon.start()
    daemon.manifest = os.path.join(sim, "manifest.csv")
    yield daemon
    daemon.stop()


def report(daemon, *args):
    path = os.path.join(daemon.workdir, "report.out")
    result = run([BINARY, "report"] + list(args) + ["--config", daemon.config,
                                                     "--output", path], timeout=300)
    assert result.returncode == 0, result.stderr
    with open(path, encoding="utf-8", newline="") as f:
        return f.read()


class PackParser(html.parser.HTMLParser):
    """Cells of the document's tables by table id, row data-key and cell
    data-field; the visible text apart (attributes and styles excluded)."""

    def __init__(self):
        super().__init__()
        self.tables = collections.defaultdict(dict)
        self.table = self.key = self.field = None
        self.cell = []
        self.text = []
        self.skip = 0
        self.svg_count = 0

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("style", "title"):
            self.skip += 1
        if tag == "svg":
            self.svg_count += 1
        if tag == "table":
            self.table = attrs.get("id")
        elif tag == "tr" and self.table:
            self.key = attrs.get("data-key")
            if self.key is not None:
                self.tables[self.table][self.key] = {}
        elif tag == "td" and self.key is not None:
            self.field = attrs.get("data-field")
            self.cell = []

    def handle_endtag(self, tag):
        if tag in ("style", "title"):
            self.skip -= 1
        if tag == "td" and self.field is not None:
            self.tables[self.table][self.key][self.field] = "".join(self.cell).strip()
            self.field = None
        elif tag == "table":
            self.table = None

    def handle_data(self, data):
        if self.skip:
            return
        self.text.append(data)
        if self.field is not None:
            self.cell.append(data)


def parse(text):
    parser = PackParser()
    parser.feed(text)
    parser.visible = " ".join(parser.text)
    return parser


def python_summary(values):
    values = sorted(values)
    if len(values) == 1:
        return values[0], values[0], values[0]
    quartiles = statistics.quantiles(values, n=4, method="inclusive")
    vigintiles = statistics.quantiles(values, n=20, method="inclusive")
    return statistics.median(values), quartiles[2], vigintiles[18]


def shown(text):
    """A number as the document prints it, None for the dash of 'no value'."""
    text = text.replace("\u00a0", " ").replace("%", "").strip()
    return None if text in ("\u2014", "") else float(text)


def need_tools(*names):
    missing = [n for n in names if shutil.which(n) is None and not os.path.exists(n)]
    if missing:
        if os.environ.get("MITILOG_REQUIRE_BROWSER"):
            pytest.fail("missing: " + ", ".join(missing))
        pytest.skip("missing: " + ", ".join(missing))


def print_pages(html_text, name):
    """Prints the HTML to PDF with headless Chromium, counts its pages with
    pdfinfo and renders them to PNG with pdftoppm; returns (pages, pngs)."""
    need_tools("/usr/bin/chromium", "pdfinfo", "pdftoppm")
    out = os.path.join(OUT_DIR, "pack-" + os.path.basename(os.path.dirname(BINARY)))
    os.makedirs(out, exist_ok=True)
    source = os.path.join(out, name + ".html")
    pdf = os.path.join(out, name + ".pdf")
    with open(source, "w", encoding="utf-8") as f:
        f.write(html_text)
    for old in glob.glob(os.path.join(out, name + "-*.png")):
        os.remove(old)
    with tempfile.TemporaryDirectory() as profile:
        result = run(["/usr/bin/chromium", "--headless", "--no-sandbox", "--disable-gpu",
                      "--no-first-run", "--disable-background-networking",
                      "--disable-component-update", "--disable-sync",
                      "--user-data-dir=" + profile, "--no-pdf-header-footer",
                      "--print-to-pdf=" + pdf, "file://" + source], timeout=120)
    assert os.path.exists(pdf), result.stderr
    info = run(["pdfinfo", pdf], timeout=60)
    assert info.returncode == 0, info.stderr
    pages = int([line.split()[1] for line in info.stdout.splitlines()
                 if line.startswith("Pages:")][0])
    size = [line for line in info.stdout.splitlines() if line.startswith("Page size:")][0]
    # A4 (ISO 216), as pdfinfo names the page size.
    assert "(A4)" in size, size
    result = run(["pdftoppm", "-r", "50", "-png", pdf, os.path.join(out, name)], timeout=120)
    assert result.returncode == 0, result.stderr
    pngs = sorted(glob.glob(os.path.join(out, name + "-*.png")))
    for png in pngs:
        with open(png, "rb") as f:
            assert f.read(8) == b"\x89PNG\r\n\x1a\n"
    return pages, pngs


def test_pack_statistics_match_python(department):
    document = parse(report(department, "stats", "--from", FROM, "--to", TO,
                            "--format", "html"))
    rows = document.tables["distribution"]
    studies = department.get_json("/api/v1/studies?from=%s&to=%s" % (FROM, TO))
    by_type = collections.defaultdict(list)
    for study in studies:
        by_type[study["exam_type"] if study["exam_type"] is not None else "(not recorded)"].append(study)
    assert set(rows) - {"(all)"} == set(by_type)
    assert int(rows["(all)"]["exams"]) == len(studies)
    checked = 0
    for exam_type, members in by_type.items():
        row = rows[exam_type]
        values = [m["max_governing"] for m in members if m["max_governing"] is not None]
        # The exams with and without a value are counted apart.
        assert int(row["exams"]) == len(members)
        assert int(row["governing_n"]) == len(values)
        assert int(row["governing_without_value"]) == len(members) - len(values)
        mi = [m["max_mi"] for m in members if m["max_mi"] is not None]
        assert int(row["mi_n"]) == len(mi)
        for prefix, sample in (("governing", values), ("mi", mi)):
            if not sample:
                assert shown(row[prefix + "_median"]) is None
                continue
            for name, expected in zip(("median", "p75", "p95"), python_summary(sample)):
                # printed with 2 decimals: within half a unit of the last digit
                assert abs(shown(row[prefix + "_" + name]) - expected) <= 0.005 + 1e-9, (
                    exam_type, prefix, name)
                checked += 1
    assert checked > 30
    # Some type of the demo holds exams without a value (a silent probe).
    assert any(int(r["governing_without_value"]) > 0 for k, r in rows.items() if k != "(all)")


def test_pack_says_what_it_is(department):
    text = report(department, "stats", "--from", FROM, "--to", TO, "--format", "html")
    document = parse(text)
    visible = document.visible
    assert "Northfield General Hospital &amp; Clinics" in text
    assert INSTITUTION in visible
    assert FROM in visible and TO in visible
    assert "Policy version" in visible
    # The caution once, not "Advisory. Advisory:".
    assert visible.count("Advisory") == 1
    # Labels, not internal keys: the site file's labels are shown.
    assert "Obstetric, 2nd trimester" in visible and "obstetric_second" not in visible
    # Governing index per row, upper case as the trade writes it.
    assert "TIS" in visible and "TIB" in visible
    # One chart per exam type.
    assert document.svg_count == len(document.tables["distribution"]) - 1
    for word in ("Sign-off", "Name", "Role", "Date", "Signature"):
        assert word in visible
    # Consistent decimals: every index cell has two decimals.
    for row in document.tables["distribution"].values():
        for field, value in row.items():
            if field.startswith(("governing_m", "governing_p", "mi_m", "mi_p")) and shown(value) is not None:
                assert len(value.split(".")[1]) == 2, (field, value)


def test_pack_csv_and_json_carry_the_html_numbers(department):
    document = parse(report(department, "stats", "--from", FROM, "--to", TO,
                            "--format", "html"))
    records = list(csv.DictReader(io.StringIO(
        report(department, "stats", "--from", FROM, "--to", TO, "--format", "csv"),
        newline="")))
    data = json.loads(report(department, "stats", "--from", FROM, "--to", TO,
                             "--format", "json"))
    assert records[0]["institution"] == INSTITUTION and data["institution"] == INSTITUTION
    json_rows = {r["key"] if r["key"] is not None else "(not recorded)": r for r in data["rows"]}
    json_rows["(all)"] = data["total"]
    compared = 0
    for record in records[1:]:
        key = record["key"]
        for table in ("distribution", "time"):
            cells = document.tables[table][key]
            for field, value in cells.items():
                if field == "share_with_findings_percent":
                    csv_value = 100 * float(record["share_with_findings"])
                else:
                    csv_value = float(record[field]) if record[field] != "" else None
                printed = shown(value)
                if printed is None:
                    assert csv_value is None, (key, field)
                    continue
                decimals = len(value.split(".")[1]) if "." in value else 0
                assert abs(printed - csv_value) <= 0.5 * 10 ** -decimals + 1e-9, (key, field)
                compared += 1
        row = json_rows[key]
        cells = document.tables["distribution"][key]
        assert int(cells["exams"]) == row["exam_count"]
        assert int(cells["governing_n"]) == row["governing"]["count"]
        for name in ("median", "p75", "p95"):
            if row["governing"]["count"]:
                assert abs(shown(cells["governing_" + name]) - row["governing"][name]) <= 0.005 + 1e-9
                assert float(record["governing_" + name]) == pytest.approx(row["governing"][name], rel=1e-5)
        assert row["governing_without_value"] == int(cells["governing_without_value"])
        if key != "(all)":
            assert record["label"] and record["governing_index"]
            assert (row["label"], row["governing_index"]) == (record["label"], record["governing_index"])
    assert compared > 100


def test_pack_prints(department):
    text = report(department, "stats", "--from", FROM, "--to", TO, "--format", "html")
    pages, pngs = print_pages(text, "statistics")
    # Two tables of 13 exam types, 13 charts and the sign-off (layout measured:
    # 3 pages on A4); more would mean rows or charts split badly.
    assert 2 <= pages <= 3
    assert len(pngs) == pages


def busiest_week(daemon):
    studies = daemon.get_json("/api/v1/studies?from=%s&to=%s" % (FROM, TO))
    weeks = collections.Counter()
    import datetime
    for study in studies:
        day = (study.get("first_acquired_at") or study.get("day") or "")[:10]
        if day:
            year, week, _ = datetime.date.fromisoformat(day).isocalendar()
            weeks["%d-W%02d" % (year, week)] += 1
    assert weeks
    return weeks.most_common(1)[0][0]


@pytest.mark.parametrize("group", ["room", "preset", "shift"])
def test_week_report_fits_two_pages(department, group):
    week = busiest_week(department)
    text = report(department, "week", week, "--group", group, "--format", "html")
    pages, pngs = print_pages(text, "week-" + group)
    assert pages <= 2, (week, group, pages)
    assert len(pngs) == pages
    visible = parse(text).visible
    assert visible.count("Advisory") == 1
    assert "obstetric_second" not in visible


def test_exam_chart_in_chromium(department):
    """The exam page's chart at 1000 px (tests/browser/exam_chart.mjs):
    MI and TI on separate panels, round ticks, no overlapping labels, no
    sideways scroll, printable."""
    browser_dir = os.path.join(REPO, "tests", "browser")
    node = shutil.which("node")
    if not (node and os.path.exists("/usr/bin/chromium") and os.path.isdir(
            os.path.join(browser_dir, "node_modules", "playwright-core"))):
        if os.environ.get("MITILOG_REQUIRE_BROWSER"):
            pytest.fail("node, /usr/bin/chromium or tests/browser/node_modules missing")
        pytest.skip("node, chromium or playwright-core (npm ci in tests/browser) missing")
    studies = department.get_json("/api/v1/studies?from=%s&to=%s" % (FROM, TO))
    with_mi = [s for s in studies if s["max_mi"] is not None]
    with_ti = [s for s in studies if s["max_governing"] is not None]
    chosen = [max(with_mi, key=lambda s: s["max_mi"]),          # the MI breach
              max(with_ti, key=lambda s: s["max_governing"]),   # the hottest TI
              max(studies, key=lambda s: s["instance_count"]),  # the longest
              next(s for s in with_ti if (s["exam_type"] or "").startswith("obstetric"))]
    out = os.path.join(OUT_DIR, "pack-" + os.path.basename(os.path.dirname(BINARY)))
    config_path = os.path.join(department.workdir, "exam-chart.json")
    with open(config_path, "w") as f:
        json.dump(dict(url="http://127.0.0.1:%d" % department.http_port, out=out,
                       studies=[s["study_instance_uid"] for s in chosen]), f)
    result = subprocess.run([node, os.path.join(browser_dir, "exam_chart.mjs"), config_path],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            timeout=180, cwd=browser_dir)
    lines = [line for line in result.stdout.splitlines() if line.startswith("{")]
    assert lines, result.stderr
    outcome = json.loads(lines[-1])
    failed = [c for c in outcome["checks"] if not c["ok"]]
    assert not failed and not outcome["errors"], (failed, outcome["errors"])
    assert len(outcome["checks"]) >= 4 * 6
    with open(outcome["pdf"], "rb") as f:
        assert f.read(5) == b"%PDF-"


def stats_page(daemon, query):
    """The statistics page read in headless Chromium (tests/browser/stats_page.mjs)."""
    browser_dir = os.path.join(REPO, "tests", "browser")
    node = shutil.which("node")
    if not (node and os.path.exists("/usr/bin/chromium") and os.path.isdir(
            os.path.join(browser_dir, "node_modules", "playwright-core"))):
        if os.environ.get("MITILOG_REQUIRE_BROWSER"):
            pytest.fail("node, /usr/bin/chromium or tests/browser/node_modules missing")
        pytest.skip("node, chromium or playwright-core (npm ci in tests/browser) missing")
    url = "http://127.0.0.1:%d/stats.html?%s" % (daemon.http_port, query)
    result = subprocess.run([node, os.path.join(browser_dir, "stats_page.mjs"), url],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            timeout=180, cwd=browser_dir)
    lines = [line for line in result.stdout.splitlines() if line.startswith("{")]
    assert lines, result.stderr
    outcome = json.loads(lines[-1])
    assert not outcome["errors"], outcome["errors"]
    return outcome


def test_institution_in_api_and_dashboard(department):
    # The configured [site] institution (docs/configuration.md) is the
    # same in the API's JSON and CSV as in the printed pack, and shown on
    # the dashboard's statistics page (common practice, no source: a
    # statistics document names whose statistics they are).
    query = "from=%s&to=%s" % (FROM, TO)
    assert department.get_json("/api/v1/stats?" + query)["institution"] == INSTITUTION
    status, body = department.get("/api/v1/stats?%s&format=csv" % query)
    assert status == 200
    records = list(csv.DictReader(io.StringIO(body, newline="")))
    assert records[0]["institution"] == INSTITUTION
    assert stats_page(department, query)["institution"] == INSTITUTION


def test_with_findings_counts_informational_advisories_apart(department):
    # "With findings" is an exam with a violation, a warning or an advisory
    # above its own limit; an exam whose only findings are advisories
    # below their own limit (first-trimester Doppler used below its TI
    # limit, docs/demo.md) is counted apart. Recounted here in Python from
    # the findings table itself.
    with department.db() as db:
        exams = dict(db.execute(
            "SELECT study_instance_uid, exam_type FROM exam_summaries "
            "WHERE day BETWEEN ? AND ?", (FROM, TO)))
        findings = db.execute(
            "SELECT study_instance_uid, severity, measured_value, limit_value FROM findings "
            "WHERE superseded = 0 AND study_instance_uid IS NOT NULL").fetchall()
    serious, informational = set(), set()
    for uid, severity, measured, limit in findings:
        if uid not in exams:
            continue
        if severity == "advisory" and measured is not None and limit is not None and \
                measured < limit:
            informational.add(uid)
        else:
            serious.add(uid)
    expected = collections.defaultdict(lambda: [0, 0, 0])
    for uid, exam_type in exams.items():
        counts = expected[exam_type]
        counts[0] += 1
        if uid in serious:
            counts[1] += 1
        elif uid in informational:
            counts[2] += 1
    data = department.get_json("/api/v1/stats?from=%s&to=%s" % (FROM, TO))
    assert {r["key"]: [r["exam_count"], r["exams_with_findings"],
                       r["exams_informational_only"]] for r in data["rows"]} == expected
    for r in data["rows"]:
        assert r["share_with_findings"] == pytest.approx(
            expected[r["key"]][1] / expected[r["key"]][0], abs=1e-9)
    # The demo's first-trimester Doppler advisories are there, and apart.
    assert expected["obstetric_first"][2] > 0
    # The headings say what is counted: the pack, and the dashboard.
    text = report(department, "stats", "--from", FROM, "--to", TO, "--format", "html")
    assert "With findings (violations, warnings, advisories above limit)" in text
    assert "Informational only" in text
    headings = stats_page(department, "from=%s&to=%s" % (FROM, TO))["headings"]
    assert "With findings (violations, warnings, advisories above their limit)" in headings


def test_night_shift_habit_not_absorbed_into_its_baseline(department):
    # docs/demo.md, planted problem night-ob-dwell: every night-shift
    # 2nd/3rd-trimester OB exam dwells at TIB 1.2-1.8 (50 exams with seed
    # 2026). Grouped by shift, each exam is compared with its exam type's
    # trailing baseline without its own shift's exams (docs/api.md), so the
    # habit is not absorbed into the baseline that judges it: most of its
    # planted exams are listed.
    with open(department.manifest, newline="") as f:
        planted = {row["study_instance_uid"] for row in csv.DictReader(f)
                   if "night-ob-dwell" in row["planted"]}
    assert len(planted) == 50
    listed, weeks = set(), {}
    for week in ("2026-W45", "2026-W46", "2026-W47", "2026-W48"):
        document = department.get_json("/api/v1/outliers?week=%s&group=shift" % week)
        weeks[week] = document
        for group in document["groups"]:
            listed |= {e["study_instance_uid"] for e in group["exams"]} & planted
    assert len(listed) > 0.75 * len(planted), len(listed)
    # The baseline each night exam of 2026-W48 was compared with, recounted
    # with Python's statistics (inclusive quantiles, Hyndman & Fan type 7):
    # the exam type's trailing exams of the other shifts.
    document = weeks["2026-W48"]
    with department.db() as db:
        rows = db.execute(
            "SELECT exam_type, shift, max_governing FROM exam_period_rows "
            "WHERE day >= ? AND day < ? AND max_governing IS NOT NULL",
            (document["baseline_from"], document["from"])).fetchall()
        types = dict(db.execute("SELECT study_instance_uid, exam_type FROM exam_summaries"))
    night = [g for g in document["groups"] if g["key"] == "night"][0]
    checked = 0
    for exam in night["exams"]:
        others = sorted(v for t, shift, v in rows
                        if t == types[exam["study_instance_uid"]] and shift != "night")
        if len(others) < document["minimum_baseline"]:
            continue
        assert exam["baseline_without_group"] is True
        assert exam["baseline_median"] == pytest.approx(statistics.median(others), abs=1e-9)
        p95 = statistics.quantiles(others, n=20, method="inclusive")[18]
        assert exam["baseline_p95"] == pytest.approx(p95, abs=1e-9)
        checked += 1
    assert checked > 0
