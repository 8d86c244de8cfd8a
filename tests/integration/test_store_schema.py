"""The store's schema 4 and the moves from schemas 1, 2 and 3.

Schema 4 records, per run, the tag below which every request is
acknowledged (runs.acked_below) instead of a row write per acknowledgement
and the partial index requests_unacked of schema 3; the view requests_owed
lists what is not acknowledged. The store is taken back here to schema 3's
acknowledgements (acked = 1 on every acknowledged request, the index, no
column), and a broker must move it once (log line, schema_version 4) with
the same requests owed: none, and the resume answers from the store. A
store whose schema is newer than the broker's is refused, unchanged.

Schema 3 keeps one `plugins` row per name and version (PRIMARY KEY(name,
version), with first_seen: which version a plugin given without one
means). A schema 2 store (plugins keyed by name alone, no first_seen) is
made here from a schema 3 one with the sqlite3 module, as schema 2 had it:
a broker started on it moves it once (log line, schema_version 3), keeps
its plugin row, and still answers a resume from the store.

Schema 2 writes a first evaluation once (its row in `evaluations`, with the
run that paid for it in evaluations.run_id); the `results` history holds
re-evaluations only; the `simulations` view lists both. A store written by
schema 1 (every first evaluation copied into `results`, no
evaluations.run_id) is made here from a schema 2 one with the sqlite3
module: the copies are put back and the column dropped, as schema 1 had
it. A broker started on it must move it once (log lines for 2 and then 3,
schema_version 3), keep every result, and answer the run's resume from the store with the same
bits and no simulation.
Run with /usr/bin/python3 (Debian's)."""
import os
import signal
import sqlite3
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fflib  # noqa: E402

N = 60
check = fflib.Check("test_store_schema")
with fflib.Pool() as pool:
    pool.start_broker()
    pool.start_worker(slots=2)
    pool.wait_workers(1)
    text = fflib.jsonl(fflib.genomes(N, 3, seed=11))
    args = ["--broker", pool.clients_ep, "--plugin", "sphere", "--run", "old", "--seed", "4"]
    rc, first, err = fflib.run_eval(args, text)
    check.ok(rc == 0 and len(first) == N, f"first run: {rc} {len(first)} lines {err[-300:]}")
    rc, again, err = fflib.run_eval(args[:-4] + ["--run", "again", "--no-cache"], text)
    check.ok(rc == 0 and len(again) == N, f"no-cache run: {rc} {err[-300:]}")

    db_path = os.path.join(pool.store, "fitfarm.db")
    db = sqlite3.connect(db_path)
    q = lambda sql: db.execute(sql).fetchone()[0]  # noqa: E731
    check.ok(q("SELECT value FROM meta WHERE name = 'schema_version'") == "4", "schema 4")
    check.ok(q("SELECT acked_below FROM runs WHERE run_id = 'old'") == N,
             "every request of the finished run is below its mark")
    check.ok(q("SELECT count(*) FROM sqlite_master WHERE name = 'requests_unacked'") == 0,
             "no requests_unacked index")
    pk = [r[1] for r in sorted((r for r in db.execute("PRAGMA table_info(plugins)") if r[5]),
                               key=lambda r: r[5])]
    check.ok(pk == ["name", "version"], f"plugins keyed by name and version: {pk}")
    check.ok(q("SELECT count(*) FROM plugins WHERE name = 'sphere' AND first_seen > 0") == 1,
             "the plugin row has first_seen")
    check.ok(q("SELECT count(*) FROM evaluations WHERE run_id = 'old'") == N,
             "first evaluations name their run in evaluations.run_id")
    check.ok(q("SELECT count(*) FROM results") == N and
             q("SELECT count(*) FROM results WHERE fresh = 1 AND run_id = 'again'") == N,
             "the results history holds the re-evaluations only")
    check.ok(q("SELECT count(*) FROM simulations") == 2 * N, "simulations lists both")
    db.close()

    pool.kill(pool.broker, signal.SIGTERM)
    check.ok(pool.broker.returncode == 0, "clean stop")
    # Acknowledgements commit lazily (store.h); after the stop all are in.
    db = sqlite3.connect(db_path)
    check.ok(db.execute("SELECT count(*) FROM requests_owed").fetchone()[0] == 0, "nothing owed")
    db.close()

    # A store from a newer broker is refused and left as it was.
    db = sqlite3.connect(db_path)
    db.execute("UPDATE meta SET value = '99' WHERE name = 'schema_version'")
    db.commit()
    db.close()
    try:
        pool.start_broker()
        rc = 0
    except RuntimeError as e:
        rc = str(e)
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok(rc != 0 and "has schema 99, made by a newer fitfarm-broker" in log,
             f"a newer store is refused: exit {rc} {log[-300:]}")
    db = sqlite3.connect(db_path)
    check.ok(db.execute("SELECT value FROM meta WHERE name = 'schema_version'").fetchone()[0]
             == "99", "and left unchanged")

    # Back to schema 3's acknowledgements, schema 2's plugins table, then
    # to schema 1's layout.
    db.executescript(
        "BEGIN;"
        "CREATE TEMP TABLE marks AS SELECT run_id, acked_below FROM runs;"
        "DROP VIEW requests_owed;"
        "ALTER TABLE runs DROP COLUMN acked_below;"
        "UPDATE requests SET acked = 1 WHERE tag < (SELECT m.acked_below FROM marks m"
        " WHERE m.run_id = requests.run_id);"
        "CREATE INDEX requests_unacked ON requests(run_id, tag) WHERE acked = 0;"
        "COMMIT;")
    seen_before = db.execute("SELECT last_seen FROM plugins WHERE name = 'sphere'").fetchone()[0]
    db.executescript(
        "BEGIN;"
        "CREATE TABLE plugins_v2(name TEXT PRIMARY KEY, version TEXT NOT NULL,"
        " objectives INTEGER NOT NULL, flags INTEGER NOT NULL, digests BLOB NOT NULL,"
        " last_seen REAL NOT NULL, seed_params TEXT, param_defaults TEXT);"
        "INSERT INTO plugins_v2 SELECT name, version, objectives, flags, digests, last_seen,"
        " seed_params, param_defaults FROM plugins;"
        "DROP TABLE plugins;"
        "ALTER TABLE plugins_v2 RENAME TO plugins;"
        "INSERT INTO results(key, run_id, fresh, status, status_name, fitness, fitness_json,"
        " error, attempts, worker, host, arch, digest, cpu_seconds, peak_rss_kb, finished_at)"
        " SELECT key, run_id, 0, status, status_name, fitness, fitness_json, error, attempts,"
        " worker, host, arch, digest, cpu_seconds, peak_rss_kb, finished_at FROM evaluations;"
        "DROP VIEW simulations;"
        "ALTER TABLE evaluations DROP COLUMN run_id;"
        "UPDATE meta SET value = '1' WHERE name = 'schema_version';"
        "COMMIT;")
    db.close()

    pool.start_broker()
    log = open(os.path.join(pool.tmp, "broker.log"), errors="replace").read()
    check.ok("moved to schema 2" in log and "moved to schema 3" in log and
             "moved to schema 4" in log and
             log.index("moved to schema 2") < log.index("moved to schema 3") <
             log.index("moved to schema 4"),
             "the broker says it moved the store from 1 to 2, to 3, then to 4")
    db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True)
    q = lambda sql: db.execute(sql).fetchone()[0]  # noqa: E731
    check.ok(q("SELECT value FROM meta WHERE name = 'schema_version'") == "4", "schema 4 again")
    check.ok(q("SELECT acked_below FROM runs WHERE run_id = 'old'") == N and
             q("SELECT acked_below FROM runs WHERE run_id = 'again'") == N and
             q("SELECT count(*) FROM requests_owed") == 0 and
             q("SELECT count(*) FROM sqlite_master WHERE name = 'requests_unacked'") == 0,
             "each run's mark set from its acknowledged requests, the index gone")
    pk = [r[1] for r in sorted((r for r in db.execute("PRAGMA table_info(plugins)") if r[5]),
                               key=lambda r: r[5])]
    check.ok(pk == ["name", "version"] and
             db.execute("SELECT first_seen FROM plugins WHERE name = 'sphere'").fetchone()[0]
             == seen_before,
             f"plugins rebuilt by name and version, first_seen from last_seen: {pk}")
    check.ok(q("SELECT count(*) FROM evaluations WHERE run_id = 'old'") == N,
             "the paying run came back from the history into evaluations.run_id")
    check.ok(q("SELECT count(*) FROM results WHERE fresh = 0") == 0, "copies dropped")
    check.ok(q("SELECT count(*) FROM results") == N, "re-evaluations kept")
    db.close()

    rc, resumed, err = fflib.run_eval(args, text)
    same = [(r["fitness"], r["status"]) for r in resumed] == [(r["fitness"], r["status"]) for r in first]
    check.ok(rc == 0 and same, f"the resume answers from the store with the same bits: {err[-300:]}")
    db = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True)
    check.ok(db.execute("SELECT count(*) FROM simulations").fetchone()[0] == 2 * N,
             "nothing simulated again")
    db.close()
    pool.stop_all()
    check.done(pool)
