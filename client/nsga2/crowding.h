/* crowding.h: NSGA-II's crowding distance (Deb, Pratap, Agarwal,
 * Meyarivan, IEEE TEC 6(2), 2002, section III-B): for each member of one
 * front, the sum over objectives of the gap between its two neighbours along
 * that objective, normalised by the front's range in it; the two ends of
 * every objective get infinity. Pure. */
#ifndef CLIENT_NSGA2_CROWDING_H
#define CLIENT_NSGA2_CROWDING_H

#include <stddef.h>

/* f: row-major objectives of all points (m per row); members: the k indices
 * of one front; dist[i] gets the distance of members[i]. An objective in
 * which the whole front has one value adds nothing (no range to divide by).
 * Ties along an objective are ordered by index, so the result depends on the
 * points only. Returns 0, or -1 when out of memory. */
int nsga2_crowding(const double *f, size_t m, const size_t *members, size_t k, double *dist);

#endif
