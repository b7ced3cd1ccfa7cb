#!/usr/bin/env bash
# tests/check-format.sh - every C and C++ file the project tracks is laid
# out as .clang-format says (Debian's clang-format). Prints the files that
# are not and exits 1; `tests/check-format.sh --fix` rewrites them.
set -uo pipefail
top=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
cd "$top"
mapfile -t files < <(git ls-files 'src/*.c' 'src/*.h' 'src/*.cc' 'tests/*.c' 'tests/*.h')
if [ "${1:-}" = --fix ]; then
  clang-format -i --style=file "${files[@]}"
  exit 0
fi
bad=0
for file in "${files[@]}"; do
  if ! clang-format --style=file --dry-run --Werror "$file" >/dev/null 2>&1; then
    echo "not formatted: $file (run tests/check-format.sh --fix)"
    bad=1
  fi
done
[ "$bad" -eq 0 ] && echo "check-format: ${#files[@]} files laid out as .clang-format says"
exit "$bad"
