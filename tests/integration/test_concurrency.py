"""Concurrent HTTP clients against one daemon fed by the simulator (seed
2026, 8 days: ISO week 45 of 2026 and the Monday of week 46): every GET
endpoint of the API (docs/api.md) at once from several threads.

libmicrohttpd answers from a pool of threads, so two requests for the
audit views compute at the same time; whatever they share must be
synchronised. Built with -DMITILOG_SANITIZE=thread (tests/run.sh builds
build-tsan/), ThreadSanitizer watches every access: the daemon runs with
TSAN_OPTIONS=halt_on_error=1:exitcode=66, so a single report ends it with
status 66 and the report on stderr, which the test checks. On the other
builds the same test checks that every concurrent answer is byte for byte
the answer the same request got alone.
"""
import os
import threading
import urllib.error
import urllib.request

import pytest

from conftest import BINARY, Daemon, run

DAYS = 8
SEED = 2026
THREADS = 8
REQUESTS_PER_THREAD = 50
# The sanitizers' common flags halt_on_error and exitcode (sanitizer
# runtime documentation, "SanitizerCommonFlags"): stop at the first report
# with a status of our choosing (66: any value no other exit path uses).
TSAN_OPTIONS = "halt_on_error=1:exitcode=66"
TSAN_EXIT = 66

# Documents that depend only on the database (not on the clock): the same
# request must get the same bytes however many run at once.
STABLE_PATHS = [
    "/api/v1/outliers?week=2026-W46&group=preset",
    "/api/v1/outliers?week=2026-W46&group=room&exams=all",
    "/api/v1/outliers?week=2026-W45&group=exam_type&exams=all",
    "/api/v1/outliers?week=2026-W46&group=shift&format=csv",
    "/api/v1/outliers?week=2026-W46&group=transducer&baseline_weeks=1&minimum=3",
    "/api/v1/stats?from=2026-11-02&to=2026-11-09",
    "/api/v1/stats?from=2026-11-02&to=2026-11-09&by=room",
    "/api/v1/stats?from=2026-11-05&to=2026-11-09&by=preset&format=csv",
    "/api/v1/drift?week=2026-W46&weeks=2&baseline_weeks=1",
    "/api/v1/drift?week=2026-W46",
    "/api/v1/policy",
    "/api/v1/findings",
    "/api/v1/instances?limit=100",
    "/api/v1/worklist",
    "/api/v1/worklist?week=2026-W46",
    "/api/v1/operators?from=2026-11-02&to=2026-11-09",
    "/api/v1/reviews",
    "/api/v1/reviews?format=csv",
    "/api/v1/session",
    "/index.html",
]
# Documents that carry the time of the request: checked for status only.
CLOCK_PATHS = ["/healthz", "/api/v1/ingest"]
# The study list costs seconds under ThreadSanitizer: each thread asks for
# it once, first, all at the same time.
STUDY_LIST = "/api/v1/studies?from=2026-11-09&to=2026-11-09"


def fetch(daemon, path):
    url = "http://127.0.0.1:%d%s" % (daemon.http_port, path)
    try:
        with urllib.request.urlopen(url, timeout=120) as response:
            return response.status, response.read()
    except urllib.error.HTTPError as e:
        return e.code, e.read()


@pytest.fixture(scope="module")
def busy_department(tmp_path_factory):
    work = tmp_path_factory.mktemp("concurrency")
    sim = os.path.join(str(work), "sim")
    environment = dict(os.environ, TSAN_OPTIONS=TSAN_OPTIONS)
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED), "--out", sim],
                 timeout=600, env=environment)
    assert result.returncode == 0, result.stderr
    # The deadline for a whole request is not what this test is about: under
    # ThreadSanitizer on a loaded machine a reply can take longer than the
    # default 10 s and the daemon would rightly close it (common practice,
    # no source).
    daemon = Daemon(work, http={"request_timeout_seconds": "120"})
    daemon.environment["TSAN_OPTIONS"] = TSAN_OPTIONS
    imported = run([BINARY, "import", "--config", daemon.config, sim], timeout=600,
                   env=environment)
    # The simulator's manifest.csv is rejected (not DICOM): exit 1 is expected.
    assert "imported" in imported.stdout, imported.stderr
    assert "ThreadSanitizer" not in imported.stderr, imported.stderr
    daemon.start(timeout=120)
    yield daemon
    if daemon.returncode is None:
        daemon.stop(timeout=120)


def test_concurrent_clients_get_the_answers_of_single_ones(busy_department):
    daemon = busy_department
    status, study_list = daemon.get(STUDY_LIST)
    assert status == 200 and study_list, study_list
    first, last = study_list[0]["study_instance_uid"], study_list[-1]["study_instance_uid"]
    paths = STABLE_PATHS + [STUDY_LIST, "/api/v1/studies/%s" % first,
                            "/api/v1/studies/%s" % last, "/api/v1/instances?study=%s" % first]
    # One request at a time first: the reference answers.
    expected = {}
    for path in paths:
        status, body = fetch(daemon, path)
        assert status == 200, (path, status, body[:300])
        expected[path] = body
    others = [path for path in paths if path != STUDY_LIST] + CLOCK_PATHS

    problems = []
    lock = threading.Lock()

    def client(number):
        for request in range(REQUESTS_PER_THREAD):
            # Each thread starts at another endpoint, so that different
            # computations overlap as well as identical ones.
            path = STUDY_LIST if request == 0 else others[(number * 5 + request) % len(others)]
            try:
                status, body = fetch(daemon, path)
            except OSError as e:   # the daemon stopped (e.g. a TSan report)
                with lock:
                    problems.append("%s: %s" % (path, e))
                return
            if status != 200 or (path in expected and body != expected[path]):
                with lock:
                    problems.append("%s: %d, %d bytes differ from the single answer"
                                    % (path, status, len(body)))

    threads = [threading.Thread(target=client, args=(n,)) for n in range(THREADS)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()

    daemon.terminate()
    code = daemon.wait(timeout=120)
    log = daemon.log()
    # ThreadSanitizer prints "WARNING: ThreadSanitizer: data race" (and
    # other kinds) and exits with TSAN_OPTIONS' exitcode.
    reports = [line for line in log.splitlines() if "ThreadSanitizer" in line]
    assert code != TSAN_EXIT and not reports, (
        "ThreadSanitizer reported (exit %d):\n%s" % (code, log[-20000:]))
    assert not problems, "\n".join(problems[:40])
    # common practice, no source: a daemon stopped with SIGTERM exits 0
    assert code == 0, log[-5000:]
    daemon.assert_clean_log()
