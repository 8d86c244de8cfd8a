/* test_granular_goertzel.c: Goertzel's algorithm (worker/plugins/granular/
 * goertzel.c) against numpy.fft.rfft, the outside reference: same complex
 * bin to 1e-9 relative on random signals (Goertzel 1958: the recursion
 * computes one DFT bin). The reference values come from
 * tests/unit/ref_granular_goertzel.py run with Debian's python3 (env PYTHON). */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "worker/plugins/granular/goertzel.h"

/* Usage example: the amplitude of a pure sinusoid over whole periods is
 * its amplitude (a textbook DFT identity: X[k] = A*N/2 for A*cos). */
static void test_amplitude_of_a_sinusoid(void **state)
{
    (void)state;
    enum { N = 480, K = 7 };
    granular_goertzel_t g;
    granular_goertzel_init(&g, K, N);
    for (int i = 0; i < N; i++)
        granular_goertzel_push(&g, 2.5 * cos(2.0 * M_PI * K * i / N + 0.3) + 1.0);
    assert_true(fabs(granular_goertzel_amplitude(&g) - 2.5) < 1e-12);
}

static char *s_read_all(FILE *f)
{
    size_t cap = 1 << 20, len = 0;
    char *buf = malloc(cap);
    assert_non_null(buf);
    size_t got;
    while ((got = fread(buf + len, 1, cap - len - 1, f)) > 0) {
        len += got;
        if (len + 1 == cap) {
            cap *= 2;
            buf = realloc(buf, cap);
            assert_non_null(buf);
        }
    }
    buf[len] = '\0';
    return buf;
}

static void test_matches_numpy_rfft(void **state)
{
    (void)state;
    const char *python = getenv("PYTHON") ? getenv("PYTHON") : "/usr/bin/python3";
    const char *src = getenv("FITFARM_SOURCE_DIR") ? getenv("FITFARM_SOURCE_DIR") : ".";
    double worst = 0.0;
    for (int seed = 1; seed <= 3; seed++) {
        char cmd[4096];
        snprintf(cmd, sizeof cmd, "'%s' '%s/tests/unit/ref_granular_goertzel.py' %d", python, src,
                 seed);
        FILE *p = popen(cmd, "r");
        assert_non_null(p);
        char *text = s_read_all(p);
        assert_int_equal(pclose(p), 0);
        char *cur = text;
        double *x = NULL;
        size_t n = 0;
        int bins = 0, signals = 0;
        while (*cur) {
            char *end = strchr(cur, '\n');
            assert_non_null(end);
            *end = '\0';
            if (strncmp(cur, "signal ", 7) == 0) {
                n = strtoul(cur + 7, NULL, 10);
                free(x);
                x = malloc(n * sizeof *x);
                assert_non_null(x);
                char *v = end + 1;
                end = strchr(v, '\n');
                assert_non_null(end);
                *end = '\0';
                for (size_t i = 0; i < n; i++) {
                    char *next;
                    x[i] = strtod(v, &next);
                    assert_true(next != v);
                    v = next;
                }
                signals++;
            } else if (strncmp(cur, "bin ", 4) == 0) {
                char *v = cur + 4, *next;
                double k = strtod(v, &next);
                double re_ref = strtod(next, &next);
                double im_ref = strtod(next, &next);
                double re, im;
                granular_goertzel(x, n, k, &re, &im);
                double err = hypot(re - re_ref, im - im_ref);
                double scale = hypot(re_ref, im_ref);
                /* 1e-9 relative to the bin (numpy.fft.rfft); a bin that is
                 * nearly empty is held to 1e-9 of the signal's energy. */
                double norm = 0.0;
                for (size_t i = 0; i < n; i++)
                    norm += fabs(x[i]);
                if (err > 1e-9 * fmax(scale, 1e-3 * norm))
                    fail_msg("seed %d, n %zu, bin %g: goertzel %.17g%+.17gi, rfft %.17g%+.17gi",
                             seed, n, k, re, im, re_ref, im_ref);
                worst = fmax(worst, err / fmax(scale, 1e-3 * norm));
                bins++;
            } else {
                assert_string_equal(cur, "end");
            }
            cur = end + 1;
        }
        assert_int_equal(signals, 6);
        assert_true(bins >= 18);
        free(x);
        free(text);
    }
    print_message("worst relative difference from numpy.fft.rfft: %.3g\n", worst);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_amplitude_of_a_sinusoid),
        cmocka_unit_test(test_matches_numpy_rfft),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
