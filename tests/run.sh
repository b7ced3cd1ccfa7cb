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

# Passes that do not depend on each other run two at a time (the machine
# has two cores and the integration tests spend most of their time waiting
# on daemons and sockets): each writes its own log, shown whole when it
# ends. Their daemons take ports from separate ranges
# (MITILOG_TEST_PORTS, tests/integration/conftest.py), so two passes never
# race for one port.
declare -a background_names=() background_pids=() background_logs=() background_starts=()
logs=$(mktemp -d /tmp/mitilog-test-logs-XXXXXX)
in_background() {  # in_background NAME COMMAND...: a step started now, judged by finish_background
  local name=$1; shift
  local log="$logs/${#background_names[@]}.log"
  echo
  echo "=== $name (started, side by side; its output follows when it ends)"
  ( "$@" ) >"$log" 2>&1 &
  background_names+=("$name")
  background_pids+=("$!")
  background_logs+=("$log")
  background_starts+=("$(date +%s)")
}
finish_background() {  # waits for every step in_background started, in order
  local i status
  for i in "${!background_pids[@]}"; do
    wait "${background_pids[$i]}"
    status=$?
    echo
    echo "=== ${background_names[$i]} (output)"
    cat "${background_logs[$i]}"
    if [ "$status" -eq 0 ]; then
      results+=("PASS  ${background_names[$i]} (ended after $(( $(date +%s) - ${background_starts[$i]} ))s)")
    else
      results+=("FAIL  ${background_names[$i]} (ended after $(( $(date +%s) - ${background_starts[$i]} ))s)")
      failed=1
    fi
  done
  background_names=() background_pids=() background_logs=() background_starts=()
}

for tree in build build-asan; do
  if [ -n "${built[$tree]:-}" ] && [ -x "$top/$tree/mitilog" ]; then
    step "unit tests $tree/" ctest --test-dir "$top/$tree" --output-on-failure -j"$jobs"
  else
    results+=("FAIL  $tree/ did not build: its tests were not run")
    failed=1
  fi
done

# PostgreSQL: the unit tests named *postgresql* (the engine against a real
# server) with a server of their own, its connection string in
# MITILOG_TEST_POSTGRESQL; the dialect checks of tests/postgresql/ (each
# compatibility function against SQLite itself, every statement on both
# engines over one simulated department); then the integration tests with
# MITILOG_TEST_ENGINE=postgresql: the session starts one throw-away server
# (tests/postgresql/cluster.sh) and gives each daemon a database of its
# own; tests about SQLite itself are skipped with their reason. Left out on
# PostgreSQL: files that start no daemon (the simulator, the commands
# without a configuration, SQLite's schema file) and those about the DICOM
# and HTTP front doors, where the store is not reached differently, and
# those about decoding frames, association limits, the printed pack and
# the demo's path, whose work happens before or after the store; they run
# on SQLite.
store_tests_on_postgresql() {
  local folder conninfo status port
  port=$("$python" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')
  folder=$(mktemp -d /tmp/mitilog-ctest-postgresql-XXXXXX)
  conninfo=$(bash "$top/tests/postgresql/cluster.sh" start "$folder" "${MITILOG_CTEST_POSTGRESQL_PORT:-$port}") ||
    { rm -rf "$folder"; return 1; }
  MITILOG_TEST_POSTGRESQL="$conninfo" ctest --test-dir "$top/build" --output-on-failure -R postgresql &&
    MITILOG_TEST_POSTGRESQL="$conninfo" MITILOG_BINARY="$top/build/mitilog" \
      "$python" -m pytest -v -p no:cacheprovider tests/postgresql
  status=$?
  bash "$top/tests/postgresql/cluster.sh" stop "$folder"
  rm -rf "$folder"
  return "$status"
}
postgresql_pass() {
  local status=0
  echo "--- unit tests named postgresql and tests/postgresql/ (one server of their own)"
  store_tests_on_postgresql || status=1
  echo "--- integration tests on PostgreSQL"
  MITILOG_BINARY="$top/build/mitilog" MITILOG_TEST_ENGINE=postgresql MITILOG_TEST_PORTS=21000-31999 \
    "$python" -m pytest -v -p no:cacheprovider tests/integration \
    --ignore=tests/integration/test_simulator.py --ignore=tests/integration/test_commands.py \
    --ignore=tests/integration/test_schema.py --ignore=tests/integration/test_negotiation.py \
    --ignore=tests/integration/test_http_hardening.py --ignore=tests/integration/test_https.py \
    --ignore=tests/integration/test_frames.py --ignore=tests/integration/test_limits.py \
    --ignore=tests/integration/test_pack.py --ignore=tests/integration/test_demo_path.py ||
    status=1
  return "$status"
}

# First pair: the normal executable on SQLite, and on PostgreSQL.
if [ -n "${built[build]:-}" ] && [ -x "$top/build/mitilog" ]; then
  in_background "integration tests build/mitilog (SQLite)" env MITILOG_BINARY="$top/build/mitilog" \
    MITILOG_TEST_PORTS=10000-20999 "$python" -m pytest -v -p no:cacheprovider tests/integration
  in_background "PostgreSQL: engine unit tests, dialect checks, integration tests build/mitilog" \
    postgresql_pass
  finish_background
fi

# Second pair: the ASan/UBSan executable on SQLite, and the ThreadSanitizer
# tree (build-tsan/, -DMITILOG_SANITIZE=thread; the executable only) built
# and run over the tests that drive the HTTP API, among them many clients at
# once (test_concurrency.py). The first ThreadSanitizer report stops the
# daemon with status 66, which the tests check with its stderr.
tsan_pass() {
  cmake -S "$top" -B "$top/build-tsan" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
    -DMITILOG_SANITIZE=thread -DMITILOG_TESTS=OFF && cmake --build "$top/build-tsan" -j1 &&
    MITILOG_BINARY="$top/build-tsan/mitilog" TSAN_OPTIONS=halt_on_error=1:exitcode=66 \
      MITILOG_TEST_PORTS=21000-31999 \
      "$python" -m pytest -v -p no:cacheprovider tests/integration/test_concurrency.py \
      tests/integration/test_access.py tests/integration/test_reports.py \
      tests/integration/test_review.py tests/integration/test_metrics.py \
      tests/integration/test_stow.py tests/integration/test_notifications.py
}
if [ -n "${built[build-asan]:-}" ] && [ -x "$top/build-asan/mitilog" ]; then
  in_background "integration tests build-asan/mitilog (ASan/UBSan, SQLite)" \
    env MITILOG_BINARY="$top/build-asan/mitilog" MITILOG_TEST_PORTS=10000-20999 \
    "$python" -m pytest -v -p no:cacheprovider tests/integration
fi
in_background "build build-tsan/ and its HTTP integration tests (ThreadSanitizer, concurrent clients)" \
  tsan_pass
finish_background
rm -rf "$logs"

# Every benchmark once at its tiny size, so that none of them rots (speed
# is never asserted: bench/README.md). MITILOG_BENCH=0 skips them.
if [ "${MITILOG_BENCH:-1}" != 0 ] && [ -n "${built[build]:-}" ]; then
  bench_tiny() {
    local script
    for script in ingest parse memory query scale hostile screen reading login screen_simulated \
      engines_ingest engines_query engines_crash metrics; do
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
