"""find_package(fitfarm) against an installed fitfarm: tests/install/plugin
(fitfarm::plugin, installed into fitfarm_PLUGIN_DIR) and tests/install/client
(fitfarm::fitfarm) are configured with CMake against a `cmake --install` of
this build into a temporary prefix; the client then evaluates through the
embedded pool, i.e. the installed fitfarm-broker and fitfarm-worker, which
must load the out-of-tree plugin from the installed plugin folder.

Outside references: each result's seed is recomputed with Python's hashlib
(refs.seed, BLAKE2b per RFC 7693); the plugin's second objective is the first
xoshiro256** uniform after splitmix64 seeding (Blackman & Vigna's reference
code, transcribed below); the first the sum of squares in IEEE 754 doubles."""
import os
import shutil
import subprocess
import tempfile

import fflib
import refs

M64 = (1 << 64) - 1


def uniform_ref(seed):
    sm = seed
    s = []
    for _ in range(4):
        sm = (sm + 0x9E3779B97F4A7C15) & M64
        z = sm
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M64
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M64
        s.append(z ^ (z >> 31))
    rotl = lambda x, k: ((x << k) | (x >> (64 - k))) & M64
    return (((rotl((s[1] * 5) & M64, 7) * 9) & M64) >> 11) * 2.0 ** -53


check = fflib.Check("test_install_cmake")
tmp = tempfile.mkdtemp(prefix="ff-install-cmake-")
prefix = os.path.join(tmp, "prefix")
cmake = shutil.which("cmake") or "/usr/bin/cmake"
r = subprocess.run([cmake, "--install", fflib.BUILD, "--prefix", prefix],
                   capture_output=True, text=True, timeout=300)
check.ok(r.returncode == 0, f"cmake --install: {r.stderr[-1000:]}")
try:
    SANITIZED = "FITFARM_SANITIZE:BOOL=ON" in open(os.path.join(fflib.BUILD, "CMakeCache.txt")).read()
except OSError:
    SANITIZED = False
san = ["-DCMAKE_C_FLAGS=-fsanitize=address,undefined"] if SANITIZED else []
built = True
for part in ("plugin", "client"):
    src = os.path.join(fflib.SOURCE, "tests", "install", part)
    bdir = os.path.join(tmp, "build-" + part)
    steps = [[cmake, "-S", src, "-B", bdir, "-DCMAKE_PREFIX_PATH=" + prefix,
              "-DOOT_PLUGIN_NAME=ootcmake"] + san,
             [cmake, "--build", bdir]]
    if part == "plugin":
        steps.append([cmake, "--install", bdir])
    for step in steps:
        r = subprocess.run(step, capture_output=True, text=True, timeout=300)
        check.ok(r.returncode == 0, f"{' '.join(step[:3])}: {r.stdout[-1500:]} {r.stderr[-1500:]}")
        built = built and r.returncode == 0
plugins = os.path.join(prefix, "lib", "fitfarm", "plugins")
check.ok(os.path.isfile(os.path.join(plugins, "ootcmake.so")), f"the plugin installed into {plugins}")
if built:
    # No LD_LIBRARY_PATH: the CMake-built client finds the library by its
    # build RPATH, the library finds the programs beside itself.
    env = {"PATH": "/usr/bin:/bin", "HOME": tmp}
    r = subprocess.run([os.path.join(tmp, "build-client", "oot_client"), "ootcmake", "7"],
                       capture_output=True, text=True, env=env, cwd=tmp, timeout=120)
    check.ok(r.returncode == 0, f"oot_client exit {r.returncode}: {r.stderr[-2000:]}")
    lines = r.stdout.splitlines()
    check.ok(len(lines) == 24, f"24 result lines, got {len(lines)}")
    bad = 0
    for line in lines:
        i, rep, seed, f0, f1 = line.split()
        i, rep, seed = int(i), int(rep), int(seed)
        g = [(i + 1) * (k + 1) / 16.0 for k in range(4)]
        s = 0.0
        for x in g:
            s += x * x
        if seed != refs.seed(7, g, rep) or float(f0) != s or float(f1) != uniform_ref(seed):
            bad += 1
            print(f"genome {i} rep {rep}: {seed} {f0} {f1}; want {refs.seed(7, g, rep)} {s} {uniform_ref(seed)}")
    check.ok(bad == 0 and lines, f"{bad} of {len(lines)} results differ from the references")
shutil.rmtree(tmp, ignore_errors=True)
check.done()
