"""deploy/systemd's units pass `systemd-analyze verify` (Debian's systemd
package; it parses and checks units without a running systemd), and a
deliberately broken unit fails it, so this test can fail.

verify checks that every ExecStart= program exists and is executable. The
units name the installed path (/usr/local/bin, the default cmake --install
prefix); this build is not installed there, so the test verifies copies
whose ExecStart= names this build's programs instead (the only change made:
a temporary install prefix would test the same text with more steps).
Besides verify, the settings the README promises are checked to be present,
and every key file a comment tells the user to make is one the unit reads.

Skips (exit 77) when systemd-analyze is missing."""
import os
import re
import shutil
import subprocess
import sys
import tempfile

import fflib

SA = shutil.which("systemd-analyze") or "/usr/bin/systemd-analyze"
if not os.access(SA, os.X_OK):
    print("test_systemd_units: skipped: systemd-analyze is missing (Debian package systemd)")
    sys.exit(77)

check = fflib.Check("test_systemd_units")
src = os.path.join(fflib.SOURCE, "deploy", "systemd")
units = sorted(f for f in os.listdir(src) if f.endswith(".service"))
check.ok(units == ["fitfarm-broker.service", "fitfarm-worker.service", "fitfarm-worker@.service"],
         f"the units: {units}")
tmp = tempfile.mkdtemp(prefix="ff-units-")
progs = {"fitfarm-broker": fflib.exe("fitfarm-broker"), "fitfarm-worker": fflib.exe("fitfarm-worker")}


def verify(*paths):
    r = subprocess.run([SA, "verify"] + list(paths), capture_output=True, text=True, timeout=120)
    return r.returncode, r.stdout + r.stderr


for u in units:
    text = open(os.path.join(src, u)).read()
    for name, path in progs.items():
        text = text.replace(f"/usr/local/bin/{name}", path)
    check.ok("/usr/local/bin/" not in text, f"{u}: every ExecStart= program rewritten")
    open(os.path.join(tmp, u), "w").write(text)
    body = open(os.path.join(src, u)).read()
    settings = dict(re.findall(r"^(\w+)=(.*)$", body, re.M))
    for want in ("DynamicUser", "NoNewPrivileges", "ProtectSystem", "PrivateTmp", "MemoryMax",
                 "TasksMax", "LoadCredential"):
        check.ok(want in settings, f"{u} sets {want}=")
    check.ok(settings.get("ProtectSystem") == "strict" and settings.get("NoNewPrivileges") == "yes",
             f"{u}: ProtectSystem=strict, NoNewPrivileges=yes")
    if "worker" in u:
        check.ok(settings.get("CPUSchedulingPolicy") == "idle" and settings.get("IOSchedulingClass") == "idle",
                 f"{u}: idle CPU and I/O class")
    # Every key file the comments tell the user to make is one a
    # LoadCredential= line reads, and every credential is passed on.
    creds = re.findall(r"^LoadCredential=([\w.]+):(\S+)$", body, re.M)
    for name, path in creds:
        check.ok("%d/" + name in body, f"{u}: credential {name} reaches ExecStart=")
    made = re.findall(r"fitfarm keygen (\w+) --dir (\S+)", body)
    for key, folder in made:
        folder = folder.replace("POOL", "%i")
        check.ok(any(p == f"{folder}/{key}.secret" for _, p in creds),
                 f"{u}: the secret key the comment makes ({folder}/{key}.secret) is the one it loads: {creds}")

rc, out = verify(*[os.path.join(tmp, u) for u in units if "@" not in u])
check.ok(rc == 0 and not out.strip(), f"systemd-analyze verify: exit {rc}: {out}")
# A template is verified through an instance of it.
shutil.copy(os.path.join(tmp, "fitfarm-worker@.service"), os.path.join(tmp, "fitfarm-worker@lab.service"))
rc, out = verify(os.path.join(tmp, "fitfarm-worker@lab.service"))
check.ok(rc == 0 and not out.strip(), f"systemd-analyze verify fitfarm-worker@lab.service: exit {rc}: {out}")

# The unpatched units fail where the programs are not installed, and a unit
# with a program that does not exist fails: verify does check.
broken = os.path.join(tmp, "fitfarm-broken.service")
open(broken, "w").write(open(os.path.join(tmp, "fitfarm-worker.service")).read()
                        .replace(progs["fitfarm-worker"], os.path.join(tmp, "no-such-fitfarm-worker")))
rc, out = verify(broken)
check.ok(rc != 0 and "no-such-fitfarm-worker" in out, f"a missing program fails verify: exit {rc}: {out}")
check.done()
