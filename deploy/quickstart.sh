#!/bin/sh
# Quick start: install what is missing, build, and evaluate 2,000 ZDT1 genomes
# on the embedded local pool (a broker and one worker process per CPU on this
# machine, started and stopped by the fitfarm command itself).
set -eu
cd "$(dirname "$0")/.."

deploy/install-deps.sh
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build -j"$(nproc)"

/usr/bin/python3 client/examples/make_genomes.py --count 2000 --dim 30 --seed 1 > build/zdt1-genomes.jsonl
echo "quickstart: evaluating build/zdt1-genomes.jsonl with plugin zdt1 on the embedded pool"
./build/client/fitfarm eval --plugin zdt1 --params '{"n": 30}' --seed 1 \
    --in build/zdt1-genomes.jsonl --out build/zdt1-results.jsonl
echo "quickstart: $(wc -l < build/zdt1-results.jsonl) results in build/zdt1-results.jsonl; the first three:"
head -n 3 build/zdt1-results.jsonl
