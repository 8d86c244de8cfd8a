/* params.h: the granular plugin's parameters, their defaults and their
 * validation. Params arrive as a JSON object; every key is optional, an
 * unknown key or a value out of range is refused with a sentence naming it.
 *
 *  key             default         unit   meaning
 *  scenario        "pad"           -      the only scenario so far (pad.h)
 *  rows            6               -      grain sites stacked vertically (1..100)
 *  columns         12              -      grain sites per row (1..100); rows*columns <= 4096
 *  radius          0.005           m      nominal grain radius
 *  density_soft    1100            kg/m^3 soft grain (rubber-like)
 *  density_stiff   2500            kg/m^3 stiff grain (glass-like)
 *  k_soft          3000            N/m    contact stiffness of a soft grain
 *  k_stiff         30000           N/m    contact stiffness of a stiff grain
 *  damping_ratio   0.2             -      of every contact's spring-dashpot, [0, 1)
 *  restitution     (none)          -      alternative to damping_ratio, (0, 1]:
 *                                         zeta = -ln e / sqrt(pi^2 + ln^2 e)
 *  friction        0.5             -      Coulomb coefficient of every contact
 *  plate_mass      0.2             kg     the rigid top plate (the instrument)
 *  frequencies     [30, 60, 120]   Hz     disturbance frequencies, 1..16 of them
 *  amplitude       5e-6            m      floor displacement amplitude
 *  settle_time     0.1             s      each of the two settling phases
 *  transient_time  0.1             s      shaking discarded before measuring
 *  measure_time    0.1             s      measured window per frequency
 *                                         (rounded down to whole periods, >= 1)
 *  scatter_radius  0.05            -      radii uniform in r*(1 +- scatter)
 *  jitter          0.02            r      initial position jitter, a fraction of r
 *  gravity         9.81            m/s^2
 *  objectives      2               -      2, or 3 to add the stiff share
 *  materials       "binary"        -      "binary": gene < 0.5 soft, else stiff;
 *                                         "graded": stiffness and density linear
 *                                         in the gene
 *  dt              (auto)          s      time step; default t_c/50 of the
 *                                         stiffest contact; at most t_c/10
 * Not here: what the scenario does with them (pad.c). */
#ifndef GRANULAR_PARAMS_H
#define GRANULAR_PARAMS_H

#include <stddef.h>

#define GRANULAR_MAX_FREQUENCIES 16
#define GRANULAR_MAX_SITES 4096

typedef enum { GRANULAR_BINARY = 0, GRANULAR_GRADED = 1 } granular_materials_t;

typedef struct {
    int rows, columns;
    double radius;
    double density_soft, density_stiff;
    double k_soft, k_stiff;
    double damping_ratio;
    double friction;
    double plate_mass;
    double frequencies[GRANULAR_MAX_FREQUENCIES];
    size_t frequency_count;
    double amplitude;
    double settle_time, transient_time, measure_time;
    double scatter_radius, jitter;
    double gravity;
    int objectives;
    granular_materials_t materials;
    double dt; /* 0: automatic */
} granular_params_t;

/* Fills the defaults of the table above. */
void granular_params_default(granular_params_t *p);

/* Parses params_json (NULL means "{}") over the defaults. Returns 0, or -1
 * with a sentence naming the offending key in err. */
int granular_params_parse(const char *params_json, granular_params_t *p, char *err, size_t errlen);

#endif
