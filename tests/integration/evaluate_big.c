/* evaluate_big: one fitfarm_evaluate of a batch larger than the broker's
 * queue cap for a run, through the public API only. Usage:
 *     evaluate_big CLIENT_ENDPOINT N
 * Evaluates N sphere genomes of 3 genes (plaintext, loopback) and checks
 * every result against the sphere formula (sum of squares, De Jong 1975),
 * bit for bit. Prints "ok N" and exits 0, or the error and exits 1. */
#include <stdio.h>
#include <stdlib.h>

#include "client/include/fitfarm.h"

int main(int argc, char **argv)
{
    if (argc != 3 || atol(argv[2]) < 1) {
        fprintf(stderr, "usage: evaluate_big CLIENT_ENDPOINT N\n");
        return 2;
    }
    long n = atol(argv[2]);
    fitfarm_options_t o = FITFARM_OPTIONS_INIT;
    o.broker = argv[1];
    o.insecure = 1;
    fitfarm_client_t *client = NULL;
    char err[512];
    if (fitfarm_client_new(&o, &client, err, sizeof err) != 0) {
        fprintf(stderr, "evaluate_big: %s\n", err);
        return 1;
    }
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    fitfarm_batch_t *batch = NULL;
    int rc = 1;
    if (fitfarm_run_open(client, &ro, &run) != 0 ||
        fitfarm_batch_new("sphere", NULL, 1, &batch) != 0)
        goto done;
    for (long i = 0; i < n; i++) {
        double g[3] = {(double)i, 0.5, -0.25};
        if (fitfarm_batch_add_f64(batch, g, 3) < 0)
            goto done;
    }
    if (fitfarm_evaluate(run, batch, NULL, NULL, 120000) != 0)
        goto done;
    for (long i = 0; i < n; i++) {
        fitfarm_result_t r = FITFARM_RESULT_INIT;
        double want = (double)i * (double)i + 0.5 * 0.5 + (-0.25) * (-0.25);
        if (fitfarm_batch_result(batch, (size_t)i, 0, &r) != 0 || r.status != FITFARM_STATUS_OK ||
            r.n_fitness != 1 || r.fitness[0] != want) {
            fprintf(stderr, "evaluate_big: genome %ld: wrong or missing result\n", i);
            goto done;
        }
    }
    printf("ok %ld\n", n);
    rc = 0;
done:
    if (rc != 0)
        fprintf(stderr, "evaluate_big: %s\n", fitfarm_client_error(client));
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
    return rc;
}
