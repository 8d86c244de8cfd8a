#!/bin/sh
# Quick start: install what is missing, build, and run `fitfarm demo`: an
# NSGA-II search of the granular pad on the embedded local pool (a broker and
# one worker process per CPU on this machine, started and stopped by the
# fitfarm programs themselves), ending with pictures and a summary in
# demo-out/.
set -eu
cd "$(dirname "$0")/.."

deploy/install-deps.sh
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build -j"$(nproc)"

echo "quickstart: fitfarm demo: NSGA-II on the granular pad on the embedded pool, then pictures in demo-out/"
./build/client/fitfarm demo --out demo-out
