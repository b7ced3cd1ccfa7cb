#!/usr/bin/env bash
# tests/fuzz/run.sh [SECONDS] - builds build-fuzz/ with clang (libFuzzer,
# AddressSanitizer, UndefinedBehaviorSanitizer) and fuzzes the reader and
# the extraction for SECONDS (default 60), seeded with the test fixtures and
# a day of simulator files. Corpus kept in build-fuzz/corpus/ (grows across
# runs); crashes land in build-fuzz/findings/. Exit non-zero on a finding.
set -euo pipefail
top=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
seconds=${1:-60}
build=$top/build-fuzz
CC=clang CXX=clang++ cmake -S "$top" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DMITILOG_FUZZ=ON -DMITILOG_TESTS=OFF >/dev/null
cmake --build "$build" -j"$(nproc)" --target fuzz_reader mitilog >/dev/null
seeds=$build/seeds
if [ ! -d "$seeds" ]; then
  mkdir -p "$seeds.tmp"
  /usr/bin/python3 "$top/tests/fixtures/make_fixtures.py" "$seeds.tmp/fixtures" >/dev/null
  ASAN_OPTIONS=detect_leaks=0 "$build/mitilog" simulate --out "$seeds.tmp/sim" --days 1 >/dev/null
  mkdir -p "$seeds"
  find "$seeds.tmp/fixtures" -type f -name '*.dcm' -exec cp {} "$seeds/" \;
  # a few simulator files of each kind (image, cine, SR): the first study's
  mapfile -t sim < <(find "$seeds.tmp/sim" -name '*.dcm' | sort)
  for f in "${sim[@]:0:40}"; do
    cp "$f" "$seeds/sim-$(echo "$f" | md5sum | cut -c1-12).dcm"
  done
  rm -rf "$seeds.tmp"
fi
mkdir -p "$build/corpus" "$build/findings"
# -malloc_limit_mb: DCMTK 3.6.7 allocates a value field of the declared
# length (e.g. 4 GB from a 1 kB file, tests/fuzz/regressions/) before it
# reads; only touched pages count, so the real limit is rss_limit_mb.
cd "$build"
export ASAN_OPTIONS=detect_leaks=1:abort_on_error=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
exec ./fuzz_reader -max_total_time="$seconds" -max_len=65536 -timeout=10 \
  -rss_limit_mb=2048 -malloc_limit_mb=8192 -artifact_prefix="$build/findings/" -print_final_stats=1 \
  "$build/corpus" "$seeds"
