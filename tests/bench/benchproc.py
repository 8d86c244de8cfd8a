"""benchproc.py: what the Python benchmarks in tests/bench share: sphere
genomes as JSON Lines, and ending a process they started, by its PID."""
import signal
import subprocess

DIM = 8


def genomes_jsonl(n, base):
    """n distinct genomes of DIM doubles, one JSON array per line."""
    return "".join("[" + ", ".join(repr(base + i * 1e-3 + d) for d in range(DIM)) + "]\n"
                   for i in range(n))


def stop(proc):
    """SIGTERM, a minute's grace, then SIGKILL."""
    if proc.poll() is None:
        proc.send_signal(signal.SIGTERM)
    try:
        proc.wait(timeout=60)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
