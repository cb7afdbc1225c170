#!/bin/sh
# valgrind memcheck over the C tests of a build (not part of the test command):
#   sh tests/valgrind.sh [BUILD_DIR]      (default: build; needs the valgrind package)
# Exits non-zero on any memcheck error or definite/indirect leak.
set -u
build=${1:-build}
status=0
for t in "$build"/test_*; do
  [ -x "$t" ] || continue
  if OPENBLAS_NUM_THREADS=1 valgrind -q --leak-check=full --errors-for-leak-kinds=definite,indirect \
       --error-exitcode=99 "$t" >/dev/null 2>"$t.valgrind.log"; then
    echo "valgrind: $(basename "$t") clean"
  else
    echo "valgrind: $(basename "$t") FAILED (see $t.valgrind.log)"
    status=1
  fi
done
exit $status
