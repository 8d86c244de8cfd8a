/* report.h: what fitfarm-nsga2 writes, and nothing of the search itself.
 *
 * stdout, one line per generation:
 *   generation G: evaluations E, cached C, failed F, hypervolume H
 *     E: requests the pool simulated for this generation's batch; C: answered
 *     from the store (under --replay every request: E is 0); F: genomes with no ok replicate; H: of the population's
 *     first front against the reference point.
 * OUT/generations.csv  generation,evaluations,cached,failed,hypervolume
 * OUT/population.jsonl every generation's population after selection,
 *   without genomes (25,000 lines for the paper's settings):
 *   {"generation": G, "rank": R, "status": "ok", "fitness": [..]}
 *   (status "failed" and fitness null for a genome with no ok replicate)
 * OUT/front.jsonl      the final first front, each line as above plus
 *   "genome": [..]
 * OUT/front.csv        the final first front: f1..fm, x1..xn, header first
 * Numbers have 17 significant digits, so they parse back to the same double
 * and a rerun can be compared byte for byte. */
#ifndef CLIENT_NSGA2_REPORT_H
#define CLIENT_NSGA2_REPORT_H

#include <stdio.h>
#include <stddef.h>
#include <stdint.h>

typedef struct nsga2_report nsga2_report_t;

/* Opens the files under dir. Caller destroys *out. Returns 0, or -1 after
 * printing which file could not be opened. */
int nsga2_report_new(const char *dir, nsga2_report_t **out);
/* Closes the files (flushing them); accepts NULL. Returns 0, or -1 when a
 * write failed (printed). */
int nsga2_report_destroy(nsga2_report_t **self_p);

/* One generation's counts and hypervolume: the stdout line and the CSV row. */
void nsga2_report_generation(nsga2_report_t *self, size_t gen, uint64_t evaluations,
                             uint64_t cached, size_t failed, double hv);
/* One individual of generation gen (fitness NULL: failed). to_front: also
 * into front.jsonl (with seed, its first replicate's evaluation seed, so
 * `fitfarm show` can repeat that evaluation) and front.csv. */
void nsga2_report_individual(nsga2_report_t *self, size_t gen, size_t rank, const double *fitness,
                             size_t m, const double *genome, size_t n, uint64_t seed,
                             int to_front);

/* Writes v with 17 significant digits (JSON and CSV alike). */
void nsga2_report_number(FILE *f, double v);

#endif
