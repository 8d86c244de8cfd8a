/* knee.h: the knee of a Pareto front, the point where improving one
 * objective starts to cost most in the others. Our rule: normalise each
 * objective to the front's range, then take the point farthest below the
 * hyperplane through the front's extreme points (the normal-boundary view of
 * Das, "On characterizing the knee of the Pareto curve based on
 * normal-boundary intersection", Structural Optimization 18, 1999). After
 * normalisation that hyperplane is sum(f) = 1 when each extreme point is best
 * in one objective and worst in the rest, which holds exactly for two
 * objectives: there the knee is the point farthest from the line joining the
 * front's two ends. For more objectives the rule is the same sum, an
 * approximation. Pure. */
#ifndef CLIENT_NSGA2_KNEE_H
#define CLIENT_NSGA2_KNEE_H

#include <stddef.h>

/* Index (0 .. h-1) of the knee among h front points (row-major, m
 * objectives); ties go to the lower index. Returns -1 when h is 0 or out of
 * memory. */
long nsga2_knee(const double *front, size_t h, size_t m);

#endif
