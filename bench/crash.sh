#!/usr/bin/env bash
# bench/crash.sh [BINARY] - the full forms of tests/integration/test_durability.py:
# 4 senders x 1,250 = 5,000 objects with 12 SIGKILLs at random (seeded)
# moments, each followed by a restart, then a re-send of everything; and
# 8 associations x 500 objects with overlapping studies. Prints pytest's
# verdict; MITILOG_CRASH_SEED=N varies the kill moments.
set -euo pipefail
top=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
export MITILOG_BINARY=${1:-$top/build/mitilog}
export TCP_NODELAY=1
export MITILOG_CRASH_SENDERS=4 MITILOG_CRASH_PER_SENDER=1250
export MITILOG_CRASH_KILLS=${MITILOG_CRASH_KILLS:-12}
export MITILOG_CRASH_SEED=${MITILOG_CRASH_SEED:-1}
export MITILOG_CONCURRENCY_ASSOCIATIONS=8 MITILOG_CONCURRENCY_PER_ASSOCIATION=500
cd "$top"
exec /usr/bin/python3 -m pytest -v -s -p no:cacheprovider tests/integration/test_durability.py
