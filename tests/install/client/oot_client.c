/* oot_client.c: a client written against the installed libfitfarm only, for
 * the install test. Usage: oot_client PLUGIN RUN_SEED. Starts the embedded
 * pool (the installed fitfarm-broker and fitfarm-worker, found beside the
 * library), evaluates 12 genomes of 4 genes with 2 replicates each on PLUGIN
 * and prints one line per result: "i replicate seed f0 f1" (17 significant
 * digits). Genome i has gene k = (i + 1) * (k + 1) / 16. */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>

#include <fitfarm.h>

#define N_GENOMES 12
#define N_GENES 4
#define N_REPLICATES 2

int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: oot_client PLUGIN RUN_SEED\n");
        return 2;
    }
    fitfarm_options_t opt = FITFARM_OPTIONS_INIT;
    opt.slots = 2;
    fitfarm_client_t *client;
    char err[1024];
    if (fitfarm_client_new(&opt, &client, err, sizeof err) != 0) {
        fprintf(stderr, "oot_client: %s\n", err);
        return 1;
    }
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = "oot";
    ro.seed = strtoull(argv[2], NULL, 10);
    fitfarm_run_t *run = NULL;
    fitfarm_batch_t *batch = NULL;
    int rc = fitfarm_run_open(client, &ro, &run);
    if (rc == 0)
        rc = fitfarm_batch_new(argv[1], "{}", N_REPLICATES, &batch);
    for (int i = 0; rc == 0 && i < N_GENOMES; i++) {
        double g[N_GENES];
        for (int k = 0; k < N_GENES; k++)
            g[k] = (i + 1) * (k + 1) / 16.0;
        if (fitfarm_batch_add_f64(batch, g, N_GENES) < 0)
            rc = -1;
    }
    if (rc == 0)
        rc = fitfarm_evaluate(run, batch, NULL, NULL, 60000);
    for (int i = 0; rc == 0 && i < N_GENOMES; i++)
        for (unsigned rep = 0; rc == 0 && rep < N_REPLICATES; rep++) {
            fitfarm_result_t r = FITFARM_RESULT_INIT;
            rc = fitfarm_batch_result(batch, (size_t)i, rep, &r);
            if (rc == 0 && (r.status != FITFARM_STATUS_OK || r.n_fitness != 2)) {
                fprintf(stderr, "oot_client: genome %d replicate %u: status %d %s\n", i, rep,
                        r.status, r.error);
                rc = -1;
            }
            if (rc == 0)
                printf("%d %u %" PRIu64 " %.17g %.17g\n", i, rep, r.seed, r.fitness[0],
                       r.fitness[1]);
        }
    if (rc != 0 && client)
        fprintf(stderr, "oot_client: %s\n", fitfarm_client_error(client));
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
    return rc == 0 ? 0 : 1;
}
