/* store_sql.c: the text of the store's statements (see store_sql.h). Owns
 * nothing else. Parameters are numbered as store.c binds them; u64 values
 * arrive as their two's-complement int64 (store.c, top). */
#include "store_sql.h"

const char *const broker_store_sql[S_COUNT_] = {
    [S_BEGIN] = "BEGIN",
    [S_COMMIT] = "COMMIT",
    [S_RUN] = "INSERT INTO runs(run_id, seed, seed_mode, created, last_activity, owner)"
              " VALUES(?1, ?2, ?3, ?4, ?4, ?5)"
              " ON CONFLICT(run_id) DO UPDATE SET last_activity = ?4, owner = ?5",
    [S_EVAL] = "INSERT OR IGNORE INTO evaluations(key, plugin, version, params, genome, seed,"
               " timeout_ms, max_attempts, created) VALUES(?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
    [S_HISTORY] = "INSERT INTO results(key, run_id, fresh, status, status_name, fitness,"
                  " fitness_json, error, attempts, worker, host, arch, digest, cpu_seconds,"
                  " peak_rss_kb, finished_at) VALUES(?1, ?15, ?16, ?2, ?3, ?4, ?5, ?6, ?7, ?8,"
                  " ?9, ?10, ?11, ?12, ?13, ?14)",
    [S_REQUEST] = "INSERT OR IGNORE INTO requests(run_id, tag, batch_tag, replicate, key, cached,"
                  " created, fresh) VALUES(?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
    [S_FIND_REQUEST] = "SELECT key, cached, fresh FROM requests WHERE run_id = ?1 AND tag = ?2",
    /* Two subqueries, so each is one b-tree descent (SQLite's min/max
     * optimisation takes one aggregate per query). */
    [S_TAG_END] = "SELECT (SELECT max(tag) FROM requests WHERE run_id = ?1),"
                  " (SELECT min(tag) FROM requests WHERE run_id = ?1)",
    [S_FIND_FRESH] = "SELECT status, fitness, error FROM results WHERE run_id = ?1 AND key = ?2"
                     " AND fresh = 1 ORDER BY rowid DESC LIMIT 1",
    [S_RESULT] = "UPDATE evaluations SET status = ?2, status_name = ?3, fitness = ?4,"
                 " fitness_json = ?5, error = ?6, attempts = ?7, worker = ?8, host = ?9,"
                 " arch = ?10, digest = ?11, cpu_seconds = ?12, peak_rss_kb = ?13,"
                 " finished_at = ?14, run_id = ?15 WHERE key = ?1",
    /* Acknowledgements. A request is acknowledged when its tag is below
     * runs.acked_below or its acked is 1, so tags first..last (?2..?3) are
     * acknowledged in two steps. S_ACK_MARK: when no request from the mark
     * up to the range is owed, the mark moves past the range and past every
     * later request already acked = 1, to the run's next request owed, or
     * one past its last. Both are reads that stop at the first owed row, and
     * the mark stands on one (or past the end): a request acknowledged out
     * of order is passed once. S_ACK_ROWS: what is still above the mark
     * (tags acknowledged before one below them) gets acked = 1. A
     * generation's answers, acknowledged in order, thus write one runs row
     * instead of a row per request. Tags are at most BROKER_TAG_MAX. */
    [S_ACK_MARK] = "UPDATE runs SET acked_below = max(?3 + 1, coalesce((SELECT tag FROM requests"
                   " WHERE run_id = ?1 AND tag > ?3 AND acked = 0 ORDER BY tag LIMIT 1),"
                   " (SELECT max(tag) + 1 FROM requests WHERE run_id = ?1), 0))"
                   " WHERE run_id = ?1 AND acked_below <= ?3 + 1 AND NOT EXISTS (SELECT 1"
                   " FROM requests WHERE run_id = ?1 AND tag >= runs.acked_below AND tag < ?2"
                   " AND acked = 0)",
    [S_ACK_ROWS] = "UPDATE requests SET acked = 1 WHERE run_id = ?1 AND tag BETWEEN"
                   " max(?2, coalesce((SELECT acked_below FROM runs WHERE run_id = ?1), 0))"
                   " AND ?3",
    /* A request at tag ?2 is to be owed while the mark is above it: the
     * requests between it and the mark, acknowledged by the mark alone, get
     * acked = 1 (S_LOWER_ROWS), then the mark comes down to ?2 (S_LOWER_MARK).
     * Rare (a re-sent request past the delivery cap, a retry on resume, a
     * gap filled below a run's last tag), and each row is written once. */
    [S_LOWER_ROWS] = "UPDATE requests SET acked = 1 WHERE run_id = ?1 AND tag > ?2"
                     " AND tag < (SELECT acked_below FROM runs WHERE run_id = ?1) AND acked = 0",
    [S_LOWER_MARK] = "UPDATE runs SET acked_below = ?2 WHERE run_id = ?1 AND acked_below > ?2",
    [S_UNACK] = "UPDATE requests SET acked = 0 WHERE run_id = ?1 AND tag = ?2",
    /* first_seen is written once: it orders a name's versions (catalog.h). */
    [S_PLUGIN] = "INSERT INTO plugins(name, version, objectives, flags, digests, last_seen,"
                 " seed_params, param_defaults, first_seen)"
                 " VALUES(?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?6)"
                 " ON CONFLICT(name, version) DO UPDATE"
                 " SET objectives = ?3, flags = ?4, digests = ?5, last_seen = ?6,"
                 " seed_params = ?7, param_defaults = ?8",
    [S_FIND_RUN] = "SELECT seed, seed_mode, owner FROM runs WHERE run_id = ?1",
    [S_REFRESH] = "UPDATE requests SET fresh = 1, acked = 0 WHERE run_id = ?1 AND tag = ?2",
};
