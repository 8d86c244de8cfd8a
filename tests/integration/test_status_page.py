"""fitfarm-broker --http: the status page at /, loaded in Debian's headless
chromium against a real broker with CURVE keys and real workers. Checks the
rendered text (machines, slots, runs, progress counts as `fitfarm status
--json` gives them), that names from the network are shown as text and not
markup (a worker named with HTML), that the page refreshes itself and loads
nothing from outside, and that a screenshot is a PNG of the window's size.
Skips (exit 77) when chromium is not installed."""
import os
import shutil
import struct
import subprocess
import sys
import tempfile
import urllib.request

import fflib

check = fflib.Check("test_status_page")
CHROMIUM = shutil.which("chromium")
if not CHROMIUM:
    print("SKIP: chromium is not installed (deploy/install-deps.sh installs it)")
    sys.exit(77)

HOSTILE = 'w<b>x&"q'  # no '/': the test names the worker's log file after it


def chromium(url, *mode):
    profile = tempfile.mkdtemp(prefix="fitfarm-chromium-")
    try:
        r = subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu",
                            "--disable-quic", "--no-first-run", "--disable-background-networking",
                            "--disable-component-update", "--disable-sync",
                            f"--user-data-dir={profile}"] + list(mode) + [url],
                           capture_output=True, text=True, timeout=120)
        return r
    finally:
        shutil.rmtree(profile, ignore_errors=True)


with fflib.Pool(secure=True) as pool:
    pool.start_broker(extra=["--http", "0"])
    pool.start_worker(slots=2, name="alpha")
    pool.start_worker(slots=1, name=HOSTILE)
    pool.wait_workers(2)
    args = pool.client_args()
    rc, out, err = fflib.run_eval(args + ["--run", "page-run", "--plugin", "sphere"],
                                  fflib.jsonl(fflib.genomes(25, 3, seed=3)))
    check.ok(rc == 0 and len(out) == 25, f"evaluation: {err[-300:]}")
    st = pool.status()
    url = pool.http_url + "/"

    with urllib.request.urlopen(url, timeout=10) as r:
        raw = r.read().decode("utf-8")
        csp = r.headers.get("Content-Security-Policy", "")
    check.ok('<meta http-equiv="refresh"' in raw, "the page refreshes itself")
    check.ok("<script" not in raw.lower() and "http://" not in raw and "https://" not in raw
             and "src=" not in raw, "no script and no outside resource in the page")
    check.ok("default-src 'none'" in csp, f"the page forbids outside resources: {csp}")
    check.ok(HOSTILE not in raw and "w&lt;b&gt;x&amp;&quot;q" in raw,
             "the hostile worker name is escaped in the HTML")

    r = chromium(url, "--dump-dom")
    dom = r.stdout
    check.ok(r.returncode == 0 and "fitfarm pool" in dom, f"chromium rendered it: {r.stderr[-300:]}")
    check.ok("<b>x" not in dom and "w&lt;b&gt;x&amp;" in dom, "the worker name did not become markup")
    host = st["workers"][0]["host"]
    check.ok(host in dom and "alpha 0/2" in dom and "Machines" in dom,
             f"machines, workers and slots are shown: {dom[:600]}")
    check.ok("2 workers" in dom and "of 3 slots running" in dom, f"totals: {dom[:400]}")
    run = [x for x in st["runs"] if x["run"] == "page-run"][0]
    row = dom.split("page-run", 1)[1].split("</tr>", 1)[0] if "page-run" in dom else ""
    cells = [c.split("<", 1)[0] for c in row.split("<td>")[1:]]
    check.ok(cells[:6] == [str(run["done"]), str(run["done"] + run["queued"] + run["running"]),
                           str(run["queued"]), str(run["running"]), str(run["cached"]),
                           str(run["failed"])],
             f"the run's row agrees with fitfarm status: {cells} vs {run}")

    shot_dir = os.environ.get("FITFARM_SCREENSHOT_DIR") or pool.tmp
    shot = os.path.join(shot_dir, "status_page.png")
    r = chromium(url, f"--screenshot={shot}", "--window-size=1200,800")
    check.ok(r.returncode == 0 and os.path.isfile(shot), f"screenshot taken: {r.stderr[-300:]}")
    if os.path.isfile(shot):
        data = open(shot, "rb").read()
        # PNG: 8-byte signature, then the IHDR chunk with width and height
        # (ISO/IEC 15948, section 11.2.2).
        ok_png = data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
        w, h = struct.unpack(">II", data[16:24]) if ok_png else (0, 0)
        check.ok(ok_png and (w, h) == (1200, 800) and len(data) > 10000,
                 f"a 1200x800 PNG with content: {w}x{h}, {len(data)} bytes")
    pool.stop_all()
    check.ok(pool.broker.returncode == 0, "clean stop")
    check.done(pool)
