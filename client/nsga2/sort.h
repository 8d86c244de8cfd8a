/* sort.h: Pareto dominance for minimisation, NSGA-II's fast non-dominated
 * sorting (Deb, Pratap, Agarwal, Meyarivan, "A fast and elitist
 * multiobjective genetic algorithm: NSGA-II", IEEE TEC 6(2), 2002, section
 * III-A), and a filter that keeps one copy of each non-dominated point for
 * the front tools. Objective vectors are rows of a row-major n x m array.
 * Pure: no I/O, no randomness. */
#ifndef CLIENT_NSGA2_SORT_H
#define CLIENT_NSGA2_SORT_H

#include <stddef.h>

/* 1 when a dominates b: a <= b in every objective and a < b in one. */
int nsga2_dominates(const double *a, const double *b, size_t m);

/* Sorts n points into fronts. rank[i] gets point i's front (0 = not
 * dominated). order (n entries) lists the points front by front, each front
 * in increasing index; front k is order[start[k] .. start[k + 1]), and start
 * needs n + 1 entries. Returns the number of fronts (0 when n is 0), or -1
 * when out of memory. O(m n^2) time, O(n^2) memory in the worst case. */
long nsga2_sort(const double *f, size_t n, size_t m, size_t *rank, size_t *order, size_t *start);

/* The non-dominated points among n, each objective vector once: writes their
 * indices to keep (n entries) in lexicographic order of the vectors (the
 * first of equal vectors wins) and returns how many, or -1 when out of
 * memory. O(n log n + n h m) for a front of h points. */
long nsga2_sort_nondominated(const double *f, size_t n, size_t m, size_t *keep);

#endif
