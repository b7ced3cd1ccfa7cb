#!/usr/bin/env bash
# tests/run.sh - the test command: installs the dependencies, builds the
# normal tree (build/) and the sanitizer tree (build-asan/), runs the unit
# tests of both with ctest, then the black-box integration tests against
# both executables, then the same integration tests with a PostgreSQL store
# (build/ only), then the HTTP tests against a ThreadSanitizer build
# (build-tsan/). Exits non-zero if anything fails; prints a summary.
set -uo pipefail

top=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
cd "$top"

# Debian's interpreter: it has python3-pydicom and python3-pytest (a python3
# earlier on PATH, e.g. pyenv's, may not).
python=/usr/bin/python3
jobs=$(nproc 2>/dev/null || echo 2)
started=$(date +%s)
declare -a results=()
failed=0

step() {  # step NAME COMMAND...: runs, records PASS/FAIL with the duration
  local name=$1; shift
  local t0=$(date +%s)
  echo
  echo "=== $name"
  if "$@"; then
    results+=("PASS  $name ($(( $(date +%s) - t0 ))s)")
  else
    results+=("FAIL  $name ($(( $(date +%s) - t0 ))s)")
    failed=1
  fi
}

build_tree() {  # build_tree DIR CMAKE-OPTIONS...
  local dir=$1; shift
  cmake -S "$top" -B "$top/$dir" -DCMAKE_BUILD_TYPE=RelWithDebInfo "$@" &&
    cmake --build "$top/$dir" -j"$jobs"
}

summary() {
  echo
  echo "=== summary ($(( $(date +%s) - started ))s)"
  printf '%s\n' "${results[@]}"
  if [ "$failed" -eq 0 ]; then echo "ALL PASSED"; else echo "FAILED"; fi
}
trap summary EXIT

step "install dependencies" bash "$top/deploy/install-dependencies.sh" || true
if [ "$failed" -ne 0 ]; then exit 1; fi

# The layout of every C and C++ file, as .clang-format says.
step "layout (tests/check-format.sh)" bash "$top/tests/check-format.sh"

declare -A built=()
for tree in build build-asan; do
  options=(-DMITILOG_SANITIZE=OFF)
  [ "$tree" = build-asan ] && options=(-DMITILOG_SANITIZE=ON)
  before=$failed
  failed=0
  step "build $tree/ (RelWithDebInfo, ${options[*]})" build_tree "$tree" "${options[@]}"
  [ "$failed" -eq 0 ] && built[$tree]=1
  [ "$before" -ne 0 ] && failed=1
done

export ASAN_OPTIONS=detect_leaks=1:abort_on_error=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
export TCP_NODELAY=1

# The dashboard's browser test (tests/integration/test_dashboard.py) drives
# Debian's chromium with playwright-core, pinned in tests/browser/.
step "browser test packages (npm ci in tests/browser/)" \
  bash -c "cd '$top/tests/browser' && npm ci --no-audit --no-fund --loglevel=error"
export MITILOG_REQUIRE_BROWSER=1

for tree in build build-asan; do
  if [ -n "${built[$tree]:-}" ] && [ -x "$top/$tree/mitilog" ]; then
    step "unit tests $tree/" ctest --test-dir "$top/$tree" --output-on-failure -j"$jobs"
    step "integration tests $tree/mitilog" env MITILOG_BINARY="$top/$tree/mitilog" \
      "$python" -m pytest -v -p no:cacheprovider tests/integration
  else
    results+=("FAIL  $tree/ did not build: its tests were not run")
    failed=1
  fi
done

# The same integration tests against a PostgreSQL store (normal tree only:
# the suite takes minutes per engine). The session starts one throw-away
# server (tests/postgresql/cluster.sh) and gives each daemon a database of
# its own; tests about SQLite itself are skipped with their reason. The
# unit tests named *postgresql* (ctest -R postgresql: the engine against a
# real server) run again with a server of their own, its connection string
# in MITILOG_TEST_POSTGRESQL (without it they skip their cases and say so).
if [ -n "${built[build]:-}" ] && [ -x "$top/build/mitilog" ]; then
  if "$python" -c 'import sys; sys.path.insert(0, sys.argv[1]); import benchlib; sys.exit(0 if benchlib.has_postgresql_engine(sys.argv[2]) else 1)' \
    "$top/bench" "$top/build/mitilog"; then
    if ctest --test-dir "$top/build" -N -R postgresql 2>/dev/null | grep -q "Test *#"; then
      store_tests_on_postgresql() {
        local folder conninfo status
        folder=$(mktemp -d /tmp/mitilog-ctest-postgresql-XXXXXX)
        conninfo=$(bash "$top/tests/postgresql/cluster.sh" start "$folder" \
          "${MITILOG_CTEST_POSTGRESQL_PORT:-$("$python" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')}") ||
          { rm -rf "$folder"; return 1; }
        MITILOG_TEST_POSTGRESQL="$conninfo" ctest --test-dir "$top/build" \
          --output-on-failure -R postgresql
        status=$?
        bash "$top/tests/postgresql/cluster.sh" stop "$folder"
        rm -rf "$folder"
        return "$status"
      }
      step "unit tests build/ on PostgreSQL (ctest -R postgresql)" store_tests_on_postgresql
    fi
    # Left out on PostgreSQL: files that start no daemon (the simulator,
    # the commands without a configuration, SQLite's schema file) and those
    # about the DICOM and HTTP front doors, where the store is not reached
    # differently; they run on SQLite above.
    step "integration tests build/mitilog on PostgreSQL" env MITILOG_BINARY="$top/build/mitilog" \
      MITILOG_TEST_ENGINE=postgresql "$python" -m pytest -v -p no:cacheprovider tests/integration \
      --ignore=tests/integration/test_simulator.py --ignore=tests/integration/test_commands.py \
      --ignore=tests/integration/test_schema.py --ignore=tests/integration/test_negotiation.py \
      --ignore=tests/integration/test_http_hardening.py --ignore=tests/integration/test_https.py
  else
    results+=("SKIP  integration tests on PostgreSQL: build/mitilog has no PostgreSQL engine")
  fi
fi

# ThreadSanitizer (build-tsan/, -DMITILOG_SANITIZE=thread; the executable
# only): the tests that drive the HTTP API, among them many clients at once
# (test_concurrency.py). The first report stops the daemon with status 66,
# which the tests check with its stderr.
before=$failed
failed=0
step "build build-tsan/ (RelWithDebInfo, -DMITILOG_SANITIZE=thread, executable only)" \
  build_tree build-tsan -DMITILOG_SANITIZE=thread -DMITILOG_TESTS=OFF
tsan_built=$(( failed == 0 ))
[ "$before" -ne 0 ] && failed=1
if [ "$tsan_built" -eq 1 ]; then
  step "HTTP integration tests build-tsan/mitilog (ThreadSanitizer, concurrent clients)" \
    env MITILOG_BINARY="$top/build-tsan/mitilog" TSAN_OPTIONS=halt_on_error=1:exitcode=66 \
    "$python" -m pytest -v -p no:cacheprovider tests/integration/test_concurrency.py \
    tests/integration/test_access.py tests/integration/test_reports.py \
    tests/integration/test_review.py
fi

# Every benchmark once at its tiny size, so that none of them rots (speed
# is never asserted: bench/README.md). MITILOG_BENCH=0 skips them.
if [ "${MITILOG_BENCH:-1}" != 0 ] && [ -n "${built[build]:-}" ]; then
  bench_tiny() {
    local script
    for script in ingest parse memory query scale hostile screen reading login screen_simulated \
      engines_ingest engines_query engines_crash; do
      echo "--- bench/$script.py --tiny"
      MITILOG="$top/build/mitilog" "$python" "$top/bench/$script.py" --tiny || return 1
    done
  }
  step "benchmarks at tiny size (bench/*.py --tiny)" bench_tiny
fi

# A short libFuzzer run over the reader and extraction (clang; build-fuzz/).
# MITILOG_FUZZ_SECONDS=0 skips it; bench/README.md describes a long run.
fuzz_seconds=${MITILOG_FUZZ_SECONDS:-60}
if [ "$fuzz_seconds" -gt 0 ]; then
  step "fuzz reader ${fuzz_seconds}s (build-fuzz/)" bash "$top/tests/fuzz/run.sh" "$fuzz_seconds"
fi

exit "$failed"
