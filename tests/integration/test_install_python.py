"""The Python package from an installed tree: `cmake --install` to a
temporary prefix, then Debian's /usr/bin/python3 with only that prefix's
dist-packages on PYTHONPATH (no build tree in the environment, run from an
unrelated folder) imports fitfarm from the prefix, starts the embedded pool
from the installed programs, and evaluates sphere (sum of squares, De Jong
1975). Also checks the man pages and both pkg-config files are installed.
Run with /usr/bin/python3 (Debian's)."""
import glob
import os
import shutil
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

check = fflib.Check("test_install_python")
tmp = tempfile.mkdtemp(prefix="ff-install-py-")
prefix = os.path.join(tmp, "prefix")
cmake = shutil.which("cmake") or "/usr/bin/cmake"
r = subprocess.run([cmake, "--install", fflib.BUILD, "--prefix", prefix],
                   capture_output=True, text=True, timeout=300)
check.ok(r.returncode == 0, f"cmake --install: {r.stderr[-1000:]}")
pkgs = glob.glob(os.path.join(prefix, "lib", "python3*", "dist-packages"))
check.ok(len(pkgs) == 1, f"one dist-packages folder under the prefix: {pkgs}")
for name in ("share/man/man1/fitfarm.1", "share/man/man1/fitfarm-broker.1",
             "share/man/man1/fitfarm-worker.1", "lib/pkgconfig/fitfarm.pc",
             "lib/pkgconfig/fitfarm-plugin.pc", "include/fitfarm/fitfarm.h"):
    check.ok(os.path.isfile(os.path.join(prefix, name)), f"installed: {name}")
if pkgs:
    code = ("import fitfarm\n"
            "with fitfarm.Pool(slots=2) as p:\n"
            "    res = p.run(seed=1).evaluate('sphere', [[1.0, 2.0], [0.5, 0.25]])\n"
            "print(fitfarm.__file__)\n"
            "print([r.fitness[0] for r in res])\n")
    env = {"PATH": "/usr/bin:/bin", "HOME": tmp, "PYTHONPATH": pkgs[0]}
    try:
        sanitized = "FITFARM_SANITIZE:BOOL=ON" in open(os.path.join(fflib.BUILD,
                                                                   "CMakeCache.txt")).read()
    except OSError:
        sanitized = False
    if sanitized:
        # The interpreter is not instrumented: the sanitizer runtimes go
        # first (as tests/CMakeLists.txt does for the pytest suite), and
        # CPython's own allocations at exit are not ours to report.
        libs = [subprocess.run(["gcc", f"-print-file-name={n}"], capture_output=True,
                               text=True).stdout.strip() for n in ("libasan.so", "libubsan.so")]
        env["LD_PRELOAD"] = ":".join(libs)
        env["ASAN_OPTIONS"] = "detect_leaks=0:abort_on_error=1"
    r = subprocess.run(["/usr/bin/python3", "-c", code], capture_output=True, text=True,
                       env=env, cwd=tmp, timeout=120)
    lines = r.stdout.split("\n")
    check.ok(r.returncode == 0, f"python3 with the installed package: {r.stderr[-800:]}")
    check.ok(len(lines) > 1 and lines[0].startswith(prefix), f"imported from the prefix: {lines[:1]}")
    check.ok(len(lines) > 1 and lines[1] == "[5.0, 0.3125]", f"sphere values: {lines[1:2]}")
shutil.rmtree(tmp, ignore_errors=True)
check.done()
