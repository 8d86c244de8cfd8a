/* cells.h: the cell list that finds candidate contact pairs in O(N)
 * (the linked-cell method: Allen & Tildesley, "Computer Simulation of
 * Liquids", 1987). Square cells at least one contact range wide over a
 * rectangle; a disc outside the rectangle is counted in the nearest edge
 * cell, which keeps every pair found (clamping never separates neighbours)
 * and costs only speed. Not here: the contact test itself (dem.c). */
#ifndef GRANULAR_CELLS_H
#define GRANULAR_CELLS_H

#include <stddef.h>
#include <stdint.h>

typedef struct {
    double x0, y0, inv_size;
    int32_t nx, ny;
    uint32_t *start; /* nx*ny+1 offsets into items */
    uint32_t *items; /* disc indices, grouped by cell */
    uint32_t *cell;  /* cell of each disc */
    size_t n;        /* discs */
} granular_cells_t;

/* Creates a cell list for n discs over [x0, x1] x [y0, y1] with cells at
 * least size wide (at most 1e6 cells: the size grows if needed). Returns
 * NULL on out of memory; caller destroys it. */
granular_cells_t *granular_cells_new(size_t n, double x0, double x1, double y0, double y1,
                                     double size);
void granular_cells_destroy(granular_cells_t **self_p);

/* Sorts the discs at (x[i], y[i]) into cells (a counting sort). */
void granular_cells_build(granular_cells_t *self, const double *x, const double *y);

/* Calls visit(ctx, i, j) once for every pair in the same or adjacent cells,
 * with i < j. */
typedef void (*granular_pair_cb)(void *ctx, uint32_t i, uint32_t j);
void granular_cells_pairs(const granular_cells_t *self, granular_pair_cb visit, void *ctx);

#endif
