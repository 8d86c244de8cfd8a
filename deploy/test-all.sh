#!/bin/sh
# Every check: install what is missing, then a Release build with -Werror and
# its whole test suite, the same suite under AddressSanitizer and
# UndefinedBehaviorSanitizer, and each fuzz target for a bounded time from its
# checked-in corpus. Exits non-zero on the first failure.
#   FITFARM_FUZZ_SECONDS  seconds per fuzz target (default 60; 0 skips fuzzing)
set -eu
cd "$(dirname "$0")/.."
JOBS=$(nproc)

deploy/install-deps.sh

echo "== release build"
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release -DFITFARM_WERROR=ON >/dev/null
cmake --build build -j"$JOBS"
echo "== release tests"
ctest --test-dir build --output-on-failure -j"$JOBS"

echo "== package: .deb built, installed with dpkg, quick start from /usr/bin, removed"
deploy/test-package.sh build-deb

echo "== sanitizer build (ASan + UBSan)"
cmake -S . -B build-san -DCMAKE_BUILD_TYPE=Debug -DFITFARM_SANITIZE=ON -DFITFARM_WERROR=ON >/dev/null
cmake --build build-san -j"$JOBS"
echo "== sanitizer tests"
# Children of the pool inherit these; leaks in forked children that exit
# through _exit are not ours to report twice.
ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
    ctest --test-dir build-san --output-on-failure -j"$JOBS"

FUZZ_SECONDS=${FITFARM_FUZZ_SECONDS:-60}
if [ "$FUZZ_SECONDS" -gt 0 ]; then
    echo "== fuzz targets, ${FUZZ_SECONDS} s each"
    CC=clang cmake -S . -B build-fuzz -DCMAKE_C_COMPILER=clang -DCMAKE_BUILD_TYPE=Debug \
        -DFITFARM_FUZZ=ON -DFITFARM_WERROR=ON >/dev/null
    cmake --build build-fuzz -j"$JOBS" --target fitfarm_fuzzers
    ran=0
    for f in build-fuzz/tests/fuzz/fuzz_*; do
        [ -x "$f" ] || continue
        name=$(basename "$f" | sed 's/^fuzz_//')
        corpus=tests/fuzz/corpus/$name
        work=build-fuzz/corpus-$name
        mkdir -p "$work"
        echo "-- $f ($corpus)"
        # No pipe: its exit status would hide a crash. A crash leaves its input
        # in build-fuzz/crash-*; fix the bug and add that input to the corpus.
        status=0
        "$f" -max_total_time="$FUZZ_SECONDS" -rss_limit_mb=2048 -print_final_stats=1 \
            -artifact_prefix=build-fuzz/ "$work" "$corpus" >"$work.log" 2>&1 || status=$?
        tail -n 12 "$work.log"
        if [ "$status" -ne 0 ]; then
            echo "test-all: $f failed (exit $status); see $work.log and build-fuzz/crash-*" >&2
            exit 1
        fi
        ran=$((ran + 1))
    done
    if [ "$ran" -eq 0 ]; then
        echo "test-all: no fuzz target was built" >&2
        exit 1
    fi
    echo "== $ran fuzz targets ran without a crash"
fi
echo "test-all: every stage passed"
