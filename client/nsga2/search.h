/* search.h: one NSGA-II search on a fitfarm pool, through the public
 * libfitfarm API only (fitfarm.h): the generational loop of Deb, Pratap,
 * Agarwal, Meyarivan, IEEE TEC 6(2), 2002, section III-C, with one batch per
 * generation holding the parents and their offspring, so parents that
 * survive are answered from the pool's store and cost nothing. Not here:
 * the operators (sort.c, crowding.c, variation.c), the files (report.c),
 * the command line (main.c). */
#ifndef CLIENT_NSGA2_SEARCH_H
#define CLIENT_NSGA2_SEARCH_H

#include <stddef.h>
#include <stdint.h>

#include <fitfarm.h>

enum {
    NSGA2_AGGREGATE_MEAN = 1,
    NSGA2_AGGREGATE_MEDIAN = 2,
};

typedef struct {
    const char *plugin, *params, *run_id, *out_dir;
    size_t genes, population, generations;
    const double *lo, *hi; /* genes bounds each, lo < hi */
    uint64_t seed;         /* the optimizer's and the run's seed */
    unsigned replicates;
    int aggregate;         /* NSGA2_AGGREGATE_* */
    double pc, eta_c, pm, eta_m;
    const double *ref;     /* hypervolume reference; NULL: the rule in report.h */
    size_t n_ref;
    int replay;            /* answer only from the store */
} nsga2_search_options_t;

/* Runs the search on client's pool, printing one line per generation on
 * stdout and writing the files of report.h into o->out_dir (which must
 * exist). Blocks until done. Returns 0, or 1 after printing on stderr what
 * went wrong. */
int nsga2_search_run(fitfarm_client_t *client, const nsga2_search_options_t *o);

#endif
