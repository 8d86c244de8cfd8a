"""An installed fitfarm works on its own: `cmake --install` of this build
into a temporary prefix, README's C example (client/examples/readme_example.c)
compiled with `cc $(pkg-config --cflags --libs fitfarm)` against that prefix
(and a plugin with `pkg-config --cflags fitfarm-plugin`),
and run with only LD_LIBRARY_PATH (and PATH) set, from a folder outside the
build tree. The library must find the installed fitfarm-broker and
fitfarm-worker beside itself, and the worker its installed plugins, with no
option or variable naming them.

Outside reference: ZDT1 as defined by Zitzler, Deb and Thiele, "Comparison of
Multiobjective Evolutionary Algorithms: Empirical Results", Evolutionary
Computation 8(2), 2000: n = 30, f1 = x1, g = 1 + 9 * sum(x2..xn) / (n - 1),
f2 = g * (1 - sqrt(f1 / g)), computed here for the example's genomes."""
import glob
import math
import os
import shutil
import subprocess
import tempfile

import fflib

check = fflib.Check("test_install")
tmp = tempfile.mkdtemp(prefix="ff-install-")
prefix = os.path.join(tmp, "prefix")
cmake = shutil.which("cmake") or "/usr/bin/cmake"
r = subprocess.run([cmake, "--install", fflib.BUILD, "--prefix", prefix],
                   capture_output=True, text=True, timeout=300)
check.ok(r.returncode == 0, f"cmake --install: {r.stdout[-1000:]} {r.stderr[-1000:]}")

libs = glob.glob(os.path.join(prefix, "lib*", "**", "libfitfarm.so"), recursive=True)
check.ok(len(libs) == 1, f"one libfitfarm.so under the prefix: {libs}")
libdir = os.path.dirname(libs[0]) if libs else os.path.join(prefix, "lib")
for prog in ("fitfarm", "fitfarm-broker", "fitfarm-worker"):
    check.ok(os.access(os.path.join(prefix, "bin", prog), os.X_OK), f"{prog} installed in bin/")
plugins = glob.glob(os.path.join(libdir, "fitfarm", "plugins", "zdt1.so"))
check.ok(len(plugins) == 1, f"zdt1.so installed under {libdir}/fitfarm/plugins")

env = dict(os.environ, PKG_CONFIG_PATH=os.path.join(libdir, "pkgconfig"))
pc = subprocess.run(["pkg-config", "--cflags", "--libs", "fitfarm"], capture_output=True, text=True, env=env)
check.ok(pc.returncode == 0 and prefix in os.path.realpath(libdir) and "-lfitfarm" in pc.stdout,
         f"pkg-config fitfarm: {pc.stdout} {pc.stderr}")
flags = pc.stdout.split()
header = open(glob.glob(os.path.join(prefix, "include", "fitfarm", "fitfarm.h"))[0]).read()
check.ok("FITFARM_OPTIONS_INIT" in header, "the installed header is the one the example is written for")
exe = os.path.join(tmp, "readme_example")
src = os.path.join(fflib.SOURCE, "client", "examples", "readme_example.c")
# A sanitizer build installs an instrumented library: a program linking it
# must carry the same runtimes (ASan insists on coming first).
try:
    SANITIZED = "FITFARM_SANITIZE:BOOL=ON" in open(os.path.join(fflib.BUILD, "CMakeCache.txt")).read()
except OSError:
    SANITIZED = False
san = ["-fsanitize=address,undefined"] if SANITIZED else []
cc = subprocess.run(["cc", "-std=c11", "-Wall", "-Wextra", "-Werror"] + san + [src, "-o", exe] + flags + ["-lm"],
                    capture_output=True, text=True, env=env, timeout=120)
check.ok(cc.returncode == 0, f"cc readme_example.c: {cc.stderr[-2000:]}")

if cc.returncode == 0:
    run_env = {"LD_LIBRARY_PATH": libdir, "PATH": "/usr/bin:/bin"}
    r = subprocess.run([exe], capture_output=True, text=True, env=run_env, cwd=tmp, timeout=120)
    check.ok(r.returncode == 0, f"readme_example exit {r.returncode}: {r.stderr[-2000:]}")
    lines = r.stdout.splitlines()
    check.ok(len(lines) == 100, f"100 lines, got {len(lines)}")
    bad = 0
    for line in lines:
        i, f1, f2 = line.split()
        i = int(i)
        x = [i / 99.0] + [0.5 if i % 2 else 0.0] * 29
        g = 1.0 + 9.0 * sum(x[1:]) / 29.0
        want = (x[0], g * (1.0 - math.sqrt(x[0] / g)))
        if not (abs(float(f1) - want[0]) <= 1e-12 * (1 + abs(want[0])) and
                abs(float(f2) - want[1]) <= 1e-12 * (1 + abs(want[1]))):
            bad += 1
            print(f"genome {i}: {f1} {f2}, ZDT1 gives {want}")
    check.ok(bad == 0 and lines, f"{bad} of {len(lines)} lines differ from the ZDT1 formula")

# The plugin SDK alone: a tiny plugin compiled with only the installed include
# folder on the path (no source tree), loaded by the installed worker through
# `fitfarm eval --plugin-dir` (the embedded pool). Reference: the sum of
# squares of each genome, added in the same order by Python's IEEE 754 doubles
# (no fused multiply-add: -ffp-contract=off), so the bits must match.
PLUGIN_SRC = r"""
#include <fitfarm_plugin.h>

static int s_create(const char *params, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    (void)params; (void)err; (void)errlen;
    *ctx = NULL;
    info->objectives = 1;
    return FITFARM_PLUGIN_OK;
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t len, uint64_t seed, double *fitness,
                      char *err, size_t errlen)
{
    (void)ctx; (void)seed; (void)err; (void)errlen;
    double s = 0.0;
    for (size_t i = 0; i < len / 8; i++) {
        double x = fitfarm_genome_f64(genome, i);
        s += x * x;
    }
    fitness[0] = s;
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx) { (void)ctx; }

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI, .name = "tinysum", .version = "1", .objectives = 1,
    .flags = FITFARM_PLUGIN_DETERMINISTIC,
    .create = s_create, .evaluate = s_evaluate, .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void) { return &s_plugin; }
"""
sdk = os.path.join(tmp, "sdk")
os.makedirs(sdk)
with open(os.path.join(sdk, "tinysum.c"), "w") as f:
    f.write(PLUGIN_SRC)
inc = os.path.join(prefix, "include", "fitfarm")
check.ok(os.path.isfile(os.path.join(inc, "fitfarm_plugin.h")), "fitfarm_plugin.h is installed")
so = os.path.join(sdk, "tinysum.so")
# The plugin's flags from the installed fitfarm-plugin.pc (the SDK headers
# and the floating-point flags a bit-exact plugin needs), nothing else.
ppc = subprocess.run(["pkg-config", "--cflags", "fitfarm-plugin"], capture_output=True, text=True,
                     env=env)
incs = [os.path.realpath(f[2:]) for f in ppc.stdout.split() if f.startswith("-I")]
check.ok(ppc.returncode == 0 and os.path.realpath(inc) in incs and "-ffp-contract=off" in ppc.stdout,
         f"pkg-config --cflags fitfarm-plugin: {ppc.stdout} {ppc.stderr}")
cc = subprocess.run(["cc", "-std=c11", "-Wall", "-Wextra", "-Werror", "-fPIC", "-shared"]
                    + ppc.stdout.split() + ["tinysum.c", "-o", so],
                    capture_output=True, text=True, cwd=sdk, timeout=120)
check.ok(cc.returncode == 0, f"a plugin compiles with pkg-config fitfarm-plugin: {cc.stderr[-2000:]}")
if cc.returncode == 0:
    gs = fflib.genomes(20, 5, seed=3)
    run_env = {"LD_LIBRARY_PATH": libdir, "PATH": "/usr/bin:/bin", "HOME": tmp}
    r = subprocess.run([os.path.join(prefix, "bin", "fitfarm"), "eval", "--plugin", "tinysum",
                        "--plugin-dir", sdk, "--slots", "1", "--run", "sdk"],
                       input=fflib.jsonl(gs), capture_output=True, text=True, env=run_env,
                       cwd=sdk, timeout=120)
    import json
    out = [json.loads(l) for l in r.stdout.splitlines() if l.strip()]
    want = []
    for g in gs:
        s = 0.0
        for x in g:
            s += x * x
        want.append(s)
    got = [o["fitness"][0] if o.get("status") == "ok" else None for o in out]
    check.ok(r.returncode == 0 and got == want,
             f"the SDK-only plugin runs in the installed pool, sums bit-identical: exit {r.returncode}, "
             f"{got[:3]} vs {want[:3]}, {r.stderr[-1000:]}")
shutil.rmtree(tmp, ignore_errors=True)
check.done()
