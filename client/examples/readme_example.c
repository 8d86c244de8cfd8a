/* readme_example.c: README.md's "The C API" example as a complete program.
 * Starts the embedded local pool (no broker named), evaluates 100 ZDT1
 * genomes of 30 genes in one blocking call and prints one line per genome:
 * "i f1 f2" with 17 significant digits. Genome i has x1 = i / 99 and
 * x2..x30 all 0 (i even) or all 0.5 (i odd).
 *
 * Build against an installed fitfarm:
 *   cc readme_example.c $(pkg-config --cflags --libs fitfarm) -o readme_example */
#include <stdio.h>

#include <fitfarm.h>

#define N_GENOMES 100
#define N_GENES 30

int main(void)
{
    static double genome[N_GENOMES][N_GENES];
    for (int i = 0; i < N_GENOMES; i++) {
        genome[i][0] = i / (double)(N_GENOMES - 1);
        for (int k = 1; k < N_GENES; k++)
            genome[i][k] = i % 2 ? 0.5 : 0.0;
    }

    fitfarm_options_t opt = FITFARM_OPTIONS_INIT; /* .broker = "tcp://host:5555", or NULL: embedded pool */
    fitfarm_client_t *client;
    char err[1024];
    if (fitfarm_client_new(&opt, &client, err, sizeof err) != 0) {
        fprintf(stderr, "%s\n", err);
        return 1;
    }

    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = "my-search";
    ro.seed = 42;
    fitfarm_run_t *run = NULL;
    fitfarm_batch_t *batch = NULL;
    int rc = fitfarm_run_open(client, &ro, &run);
    if (rc == 0)
        rc = fitfarm_batch_new("zdt1", "{\"n\": 30}", 1, &batch);
    for (int i = 0; rc == 0 && i < N_GENOMES; i++)
        if (fitfarm_batch_add_f64(batch, genome[i], N_GENES) < 0)
            rc = -1;
    if (rc == 0)
        rc = fitfarm_evaluate(run, batch, NULL, NULL, -1);
    for (int i = 0; rc == 0 && i < N_GENOMES; i++) {
        fitfarm_result_t r = FITFARM_RESULT_INIT;
        rc = fitfarm_batch_result(batch, (size_t)i, 0, &r); /* r.status, r.fitness[0..r.n_fitness) */
        if (rc == 0 && (r.status != FITFARM_STATUS_OK || r.n_fitness != 2))
            rc = -1;
        if (rc == 0)
            printf("%d %.17g %.17g\n", i, r.fitness[0], r.fitness[1]);
    }
    if (rc != 0)
        fprintf(stderr, "readme_example: %s\n", fitfarm_client_error(client));
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
    return rc == 0 ? 0 : 1;
}
