"""The man pages in deploy/man/ render without a warning (groff -man -ww)
and say what the programs accept: every option fitfarm-broker --help and
fitfarm-worker --help list is in its page, and every command fitfarm --help
lists is in fitfarm(1). Skips (77) without groff.
Run with /usr/bin/python3 (Debian's)."""
import os
import re
import shutil
import subprocess
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

MAN = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "deploy", "man")
if not shutil.which("groff"):
    print("test_man_pages: skipped: groff is not installed")
    sys.exit(77)
check = fflib.Check("test_man_pages")


def page_text(name):
    r = subprocess.run(["groff", "-man", "-Tutf8", "-ww", os.path.join(MAN, name)],
                       capture_output=True, text=True, env=dict(os.environ, LC_ALL="C.UTF-8"))
    check.ok(r.returncode == 0 and r.stderr == "", f"{name} renders cleanly: {r.stderr[:300]}")
    # groff's typewriter output marks bold and underline with backspaces
    return re.sub(".\b", "", r.stdout).replace("\u2010", "-").replace("\u2212", "-")


def help_options(program):
    out = subprocess.run([fflib.exe(program), "--help"], capture_output=True, text=True).stdout
    return sorted(set(re.findall(r"^\s+(--[a-z][a-z0-9-]*)", out, re.M)))


for program in ("fitfarm-broker", "fitfarm-worker"):
    text = page_text(program + ".1")
    for opt in help_options(program):
        if opt in ("--help", "--version"):
            continue
        check.ok(opt in text, f"{program}.1 documents {opt}")

text = page_text("fitfarm.1")
out = subprocess.run([fflib.exe("fitfarm"), "--help"], capture_output=True, text=True).stdout
commands = re.findall(r"^  ([a-z]+)\s{2,}", out, re.M)
check.ok(len(commands) >= 10, f"fitfarm --help lists its commands: {commands}")
for cmd in commands:
    if cmd != "help":
        check.ok(re.search(rf"^\s+{cmd}\b", text, re.M) is not None, f"fitfarm.1 documents {cmd}")
check.done()
