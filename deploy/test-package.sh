#!/bin/sh
# The package stage of CI: builds the .deb with CPack (prefix /usr), installs
# it with dpkg on this machine, runs the quick-start evaluation and a short
# demo from the installed programs only (nothing of the build tree on PATH
# or in LD_LIBRARY_PATH), then removes the package again. Needs root (dpkg);
# skips with a message otherwise. Usage: deploy/test-package.sh [BUILD_DIR]
set -eu
cd "$(dirname "$0")/.."
if [ "$(id -u)" -ne 0 ]; then
    echo "test-package: skipped: dpkg -i needs root"
    exit 0
fi
BUILD=${1:-build-deb}
JOBS=$(nproc)
cmake -S . -B "$BUILD" -DCMAKE_BUILD_TYPE=Release -DFITFARM_WERROR=ON -DCMAKE_INSTALL_PREFIX=/usr >/dev/null
cmake --build "$BUILD" -j"$JOBS" >/dev/null
# CPack notes that plugins (dlopened modules) carry no soname: expected.
(cd "$BUILD" && cpack -G DEB >cpack.log 2>&1) || { cat "$BUILD/cpack.log"; exit 1; }
DEB=$(ls "$BUILD"/fitfarm_*.deb | head -n 1)
echo "test-package: built $DEB"
dpkg-deb -f "$DEB" Depends
if dpkg-query -W -f='${Status}' fitfarm 2>/dev/null | grep -q "install ok installed"; then
    echo "test-package: a fitfarm package is already installed here; not touching it" >&2
    exit 1
fi
work=$(mktemp -d)
cleanup() {
    dpkg -r fitfarm >/dev/null 2>&1 || true
    rm -rf "$work"
}
trap cleanup EXIT
dpkg -i "$DEB" >/dev/null
# Only the installed tree from here on.
cd "$work"
env -i PATH=/usr/bin:/bin HOME="$work" sh -c '
    set -eu
    printf "[0.5, 0.25, 0.125]\n[1, 2, 3]\n" > genomes.jsonl
    fitfarm eval --plugin sphere --in genomes.jsonl --out results.jsonl --quiet
    # sphere: sum of squares (De Jong 1975): 0.328125 and 14
    grep -q "\"fitness\": \[0.328125\]" results.jsonl
    grep -q "\"fitness\": \[14\]" results.jsonl
    fitfarm demo --out demo-out --population 4 --generations 1 >/dev/null
    test -s demo-out/front.png && test -s demo-out/design-knee.png
    test -f /usr/include/fitfarm/fitfarm.h && test -f /usr/include/fitfarm/fitfarm_plugin.h
    man -w fitfarm >/dev/null 2>&1 || true
'
echo "test-package: installed with dpkg, quick-start evaluation and demo ran from /usr/bin, removed"
