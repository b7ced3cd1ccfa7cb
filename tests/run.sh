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

# The rest runs in two lanes side by side (the machine has two cores, and
# the integration tests spend much of their time waiting on daemons and
# sockets). Each lane runs its steps one after another into its own log,
# shown whole when the lane ends; its PASS/FAIL lines join the summary,
# with the names of the tests that failed. The lanes' daemons take ports
# from separate ranges (MITILOG_TEST_PORTS, tests/integration/conftest.py),
# so two lanes never race for one port.
#
#   lane 1: the integration tests against the ASan/UBSan executable on
#           SQLite; the benchmarks at tiny size; the fuzzing run.
#   lane 2: the PostgreSQL pass with the normal executable; the normal
#           executable on SQLite over the files the PostgreSQL pass leaves
#           out; the ThreadSanitizer tree and its HTTP tests.
#
# So every integration test runs against the normal executable (on
# PostgreSQL, or on SQLite where the store is not what it tests) and
# against the ASan/UBSan one on SQLite.
logs=$(mktemp -d /tmp/mitilog-test-logs-XXXXXX)
declare -a lane_names=() lane_pids=() lane_logs=() lane_starts=()
lane_results=/dev/null   # set in each lane's subshell

lane_step() {  # lane_step NAME COMMAND...: one step of a lane; records PASS/FAIL
  local name=$1; shift
  local t0=$(date +%s) output
  output=$(mktemp "$logs/step-XXXXXX")
  echo
  echo "=== $name"
  if "$@" 2>&1 | tee "$output"; then
    echo "PASS  $name ($(( $(date +%s) - t0 ))s)" >>"$lane_results"
    rm -f "$output"
    return 0
  fi
  echo "FAIL  $name ($(( $(date +%s) - t0 ))s)" >>"$lane_results"
  # pytest's short summary names each failed test; a benchmark its script
  grep -E '^(FAILED|ERROR) |^--- bench/.* failed$|^[0-9]+% tests passed|^[[:space:]]+[0-9]+ - ' "$output" |
    tail -20 | cut -c1-220 | sed 's/^/      /' >>"$lane_results"
  rm -f "$output"
  return 1
}

in_lane() {  # in_lane NAME FUNCTION: runs FUNCTION in the background as a lane
  local name=$1 function=$2
  local index=${#lane_names[@]}
  echo
  echo "=== lane $name (started; its output follows when it ends)"
  ( lane_results="$logs/$index.results"; : >"$lane_results"; set -o pipefail; "$function" ) \
    >"$logs/$index.log" 2>&1 &
  lane_names+=("$name")
  lane_pids+=("$!")
  lane_logs+=("$logs/$index.log")
  lane_starts+=("$(date +%s)")
}

finish_lanes() {  # waits for every lane, in order
  local i status
  for i in "${!lane_pids[@]}"; do
    wait "${lane_pids[$i]}"
    status=$?
    echo
    echo "=== lane ${lane_names[$i]} (output)"
    cat "${lane_logs[$i]}"
    if [ -f "$logs/$i.results" ]; then
      while IFS= read -r line; do results+=("$line"); done <"$logs/$i.results"
    fi
    results+=("      (lane ${lane_names[$i]} ended after $(( $(date +%s) - ${lane_starts[$i]} ))s)")
    [ "$status" -eq 0 ] || failed=1
  done
}

integration() {  # integration BINARY PORTS [PYTEST ARGUMENTS...]
  local binary=$1 ports=$2; shift 2
  MITILOG_BINARY="$binary" MITILOG_TEST_PORTS="$ports" \
    "$python" -m pytest -v -p no:cacheprovider --durations=15 "$@"
}

integration_on_postgresql() {
  MITILOG_TEST_ENGINE=postgresql integration "$@"
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
# own; tests about SQLite itself are skipped with their reason.
store_tests_on_postgresql() {
  local folder conninfo status port
  port=$("$python" -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')
  folder=$(mktemp -d /tmp/mitilog-ctest-postgresql-XXXXXX)
  conninfo=$(bash "$top/tests/postgresql/cluster.sh" start "$folder" "${MITILOG_CTEST_POSTGRESQL_PORT:-$port}" fast) ||
    { rm -rf "$folder"; return 1; }
  MITILOG_TEST_POSTGRESQL="$conninfo" ctest --test-dir "$top/build" --output-on-failure -R postgresql &&
    MITILOG_TEST_POSTGRESQL="$conninfo" MITILOG_BINARY="$top/build/mitilog" \
      "$python" -m pytest -v -p no:cacheprovider tests/postgresql
  status=$?
  bash "$top/tests/postgresql/cluster.sh" stop "$folder"
  rm -rf "$folder"
  return "$status"
}

# Files left out on PostgreSQL: those that start no daemon (the simulator,
# the commands without a configuration, SQLite's schema file), those about
# the DICOM and HTTP front doors, where the store is not reached
# differently, and those about decoding frames, association limits, the
# printed pack and the demo's path, whose work happens before or after the
# store. They run with the normal executable on SQLite instead.
not_on_postgresql=(test_simulator test_commands test_schema test_negotiation test_http_hardening
  test_https test_frames test_limits test_pack test_demo_path)

lane_one() {
  local status=0
  if [ -n "${built[build-asan]:-}" ] && [ -x "$top/build-asan/mitilog" ]; then
    lane_step "integration tests build-asan/mitilog (ASan/UBSan, SQLite)" \
      integration "$top/build-asan/mitilog" 10000-20999 tests/integration || status=1
  fi
  # Every benchmark once at its tiny size, so that none of them rots (speed
  # is never asserted: bench/README.md). MITILOG_BENCH=0 skips them.
  if [ "${MITILOG_BENCH:-1}" != 0 ] && [ -n "${built[build]:-}" ]; then
    lane_step "benchmarks at tiny size (bench/*.py --tiny)" bench_tiny || status=1
  fi
  # A short libFuzzer run over the reader and extraction (clang; build-fuzz/).
  # MITILOG_FUZZ_SECONDS=0 skips it; bench/README.md describes a long run.
  local fuzz_seconds=${MITILOG_FUZZ_SECONDS:-60}
  if [ "$fuzz_seconds" -gt 0 ]; then
    lane_step "fuzz reader ${fuzz_seconds}s (build-fuzz/)" bash "$top/tests/fuzz/run.sh" "$fuzz_seconds" ||
      status=1
  fi
  return "$status"
}

bench_tiny() {
  local script
  for script in ingest parse memory query scale hostile screen reading login screen_simulated \
    engines_ingest engines_query engines_crash metrics; do
    echo "--- bench/$script.py --tiny"
    MITILOG="$top/build/mitilog" "$python" "$top/bench/$script.py" --tiny || {
      echo "--- bench/$script.py --tiny failed"
      return 1
    }
  done
}

# The ThreadSanitizer tree (build-tsan/, -DMITILOG_SANITIZE=thread; the
# executable only) built and run over the tests that drive the HTTP API,
# among them many clients at once (test_concurrency.py). The first
# ThreadSanitizer report stops the daemon with status 66, which the tests
# check with its stderr.
tsan_pass() {
  cmake -S "$top" -B "$top/build-tsan" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
    -DMITILOG_SANITIZE=thread -DMITILOG_TESTS=OFF && cmake --build "$top/build-tsan" -j1 &&
    TSAN_OPTIONS=halt_on_error=1:exitcode=66 \
      integration "$top/build-tsan/mitilog" 21000-31999 tests/integration/test_concurrency.py \
      tests/integration/test_access.py tests/integration/test_reports.py \
      tests/integration/test_review.py tests/integration/test_metrics.py \
      tests/integration/test_stow.py tests/integration/test_notifications.py \
      tests/integration/test_snapshots.py
}

lane_two() {
  local ignored=() files=() name status=0
  for name in "${not_on_postgresql[@]}"; do
    ignored+=(--ignore="tests/integration/$name.py")
    files+=("tests/integration/$name.py")
  done
  if [ -n "${built[build]:-}" ] && [ -x "$top/build/mitilog" ]; then
    lane_step "PostgreSQL: engine unit tests and dialect checks (one server of their own)" \
      store_tests_on_postgresql || status=1
    lane_step "integration tests build/mitilog (PostgreSQL)" \
      integration_on_postgresql "$top/build/mitilog" 21000-31999 tests/integration "${ignored[@]}" ||
      status=1
    lane_step "integration tests build/mitilog (SQLite, the files left out on PostgreSQL)" \
      integration "$top/build/mitilog" 21000-31999 "${files[@]}" || status=1
  fi
  lane_step "build build-tsan/ and its HTTP integration tests (ThreadSanitizer, concurrent clients)" \
    tsan_pass || status=1
  return "$status"
}

in_lane "1 (ASan/UBSan; benchmarks; fuzzing)" lane_one
in_lane "2 (PostgreSQL; SQLite-only files; ThreadSanitizer)" lane_two
finish_lanes
rm -rf "$logs"

exit "$failed"
