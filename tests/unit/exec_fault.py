#!/usr/bin/env python3
"""exec_fault.py: a misbehaving exec-plugin program for tests/unit/test_exec_plugin.c.

Introduction: argv[1] (default "good") chooses it:
  good        a correct introduction, 2 objectives, not deterministic
  garbage     "hello" instead of JSON
  exit        exits with status 3 before writing anything
  silent      writes nothing and waits (the introduction time-out)
  objectives0 declares 0 objectives
  version2    declares protocol version 2
  unknownkey  a correct introduction plus an unknown key
  long        a line of 2 MiB
  missing     no "version"
  mismatch    a good introduction the first time (marker file argv[2] absent),
              version "2" afterwards

Each request's first gene chooses the answer:
  0 fitness [gene1, pid]      5 a 2 MiB line
  1 exits with status 3       6 fitness [1, "a"]
  2 "this is not json"        7 {"error": "simulated failure"}
  3 hangs                     8 {"invalid": "gene out of range"}
  4 fitness [1.0] (one)       9 a good answer plus an extra line
  10 kills itself with SIGSEGV
  11 fitness [seed mod 1000003, number of params]
  12 sleeps gene1 seconds, then fitness [gene1, pid]
"""
import json
import os
import signal
import sys
import time


def out(text):
    sys.stdout.write(text + "\n")
    sys.stdout.flush()


def main():
    mode = sys.argv[1] if len(sys.argv) > 1 else "good"
    intro = {"fitfarm_exec": 1, "name": "fault", "version": "1", "objectives": 2,
             "deterministic": False}
    if mode == "garbage":
        out("hello")
    elif mode == "exit":
        sys.exit(3)
    elif mode == "silent":
        time.sleep(3600)
    elif mode == "objectives0":
        intro["objectives"] = 0
        out(json.dumps(intro))
    elif mode == "version2":
        intro["fitfarm_exec"] = 2
        out(json.dumps(intro))
    elif mode == "unknownkey":
        intro["colour"] = "blue"
        out(json.dumps(intro))
    elif mode == "long":
        out("x" * (2 << 20))
    elif mode == "missing":
        del intro["version"]
        out(json.dumps(intro))
    elif mode == "mismatch":
        marker = sys.argv[2]
        if os.path.exists(marker):
            intro["version"] = "2"
        else:
            open(marker, "w").close()
        out(json.dumps(intro))
    else:
        out(json.dumps(intro))
    for line in sys.stdin:
        req = json.loads(line)
        genome = req["genome"]
        what = int(genome[0]) if genome else 0
        if what == 0:
            out(json.dumps({"fitness": [genome[1] if len(genome) > 1 else 0.0, os.getpid()]}))
        elif what == 1:
            sys.exit(3)
        elif what == 2:
            out("this is not json")
        elif what == 3:
            time.sleep(3600)
        elif what == 4:
            out(json.dumps({"fitness": [1.0]}))
        elif what == 5:
            out('{"fitness": [' + " " * (2 << 20) + "1, 2]}")
        elif what == 6:
            out('{"fitness": [1, "a"]}')
        elif what == 7:
            out(json.dumps({"error": "simulated failure"}))
        elif what == 8:
            out(json.dumps({"invalid": "gene out of range"}))
        elif what == 9:
            out(json.dumps({"fitness": [0.5, os.getpid()]}))
            out(json.dumps({"fitness": [0.5, os.getpid()]}))
        elif what == 10:
            os.kill(os.getpid(), signal.SIGSEGV)
        elif what == 11:
            out(json.dumps({"fitness": [int(req["seed"]) % 1000003, len(req["params"])]}))
        elif what == 12:
            time.sleep(genome[1])
            out(json.dumps({"fitness": [genome[1], os.getpid()]}))


if __name__ == "__main__":
    main()
