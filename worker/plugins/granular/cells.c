/* cells.c: counting-sort cell list and the half-shell pair sweep (each cell
 * is paired with itself and four of its eight neighbours, so every pair of
 * adjacent cells is visited once). Owns no physics. */
#include "cells.h"

#include <math.h>
#include <stdlib.h>

#define GRANULAR_MAX_CELLS 1000000.0

granular_cells_t *granular_cells_new(size_t n, double x0, double x1, double y0, double y1,
                                     double size)
{
    granular_cells_t *self = calloc(1, sizeof *self);
    if (!self)
        return NULL;
    double w = x1 > x0 ? x1 - x0 : size, h = y1 > y0 ? y1 - y0 : size;
    while ((w / size + 1.0) * (h / size + 1.0) > GRANULAR_MAX_CELLS)
        size *= 2.0;
    self->x0 = x0;
    self->y0 = y0;
    self->inv_size = 1.0 / size;
    self->nx = (int32_t)floor(w / size) + 1;
    self->ny = (int32_t)floor(h / size) + 1;
    self->n = n;
    size_t cells = (size_t)self->nx * (size_t)self->ny;
    self->start = calloc(cells + 1, sizeof *self->start);
    self->items = calloc(n ? n : 1, sizeof *self->items);
    self->cell = calloc(n ? n : 1, sizeof *self->cell);
    if (!self->start || !self->items || !self->cell)
        granular_cells_destroy(&self);
    return self;
}

void granular_cells_destroy(granular_cells_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    granular_cells_t *self = *self_p;
    free(self->start);
    free(self->items);
    free(self->cell);
    free(self);
    *self_p = NULL;
}

static int32_t s_clamp(double v, int32_t n)
{
    /* NaN lands in cell 0 too; the integrator reports it. */
    if (!(v >= 0.0))
        return 0;
    if (v >= (double)(n - 1))
        return n - 1;
    return (int32_t)v;
}

void granular_cells_build(granular_cells_t *self, const double *x, const double *y)
{
    size_t cells = (size_t)self->nx * (size_t)self->ny;
    for (size_t c = 0; c <= cells; c++)
        self->start[c] = 0;
    for (size_t i = 0; i < self->n; i++) {
        int32_t cx = s_clamp((x[i] - self->x0) * self->inv_size, self->nx);
        int32_t cy = s_clamp((y[i] - self->y0) * self->inv_size, self->ny);
        uint32_t c = (uint32_t)cy * (uint32_t)self->nx + (uint32_t)cx;
        self->cell[i] = c;
        self->start[c + 1]++;
    }
    for (size_t c = 0; c < cells; c++)
        self->start[c + 1] += self->start[c];
    /* Fill from the back so each cell lists its discs in ascending order. */
    for (size_t i = self->n; i-- > 0;) {
        uint32_t c = self->cell[i];
        self->items[--self->start[c + 1]] = (uint32_t)i;
    }
    /* Each start[c+1] was counted down to the first slot of cell c: shift
     * the offsets back by one cell. */
    for (size_t c = 0; c < cells; c++)
        self->start[c] = self->start[c + 1];
    self->start[cells] = (uint32_t)self->n;
}

void granular_cells_pairs(const granular_cells_t *self, granular_pair_cb visit, void *ctx)
{
    /* Forward half of the neighbourhood: E, NW, N, NE. */
    static const int32_t dx[4] = {1, -1, 0, 1};
    static const int32_t dy[4] = {0, 1, 1, 1};
    for (int32_t cy = 0; cy < self->ny; cy++) {
        for (int32_t cx = 0; cx < self->nx; cx++) {
            uint32_t c = (uint32_t)cy * (uint32_t)self->nx + (uint32_t)cx;
            uint32_t a0 = self->start[c], a1 = self->start[c + 1];
            if (a0 == a1)
                continue;
            for (uint32_t a = a0; a < a1; a++)
                for (uint32_t b = a + 1; b < a1; b++)
                    visit(ctx, self->items[a], self->items[b]);
            for (int k = 0; k < 4; k++) {
                int32_t ox = cx + dx[k], oy = cy + dy[k];
                if (ox < 0 || ox >= self->nx || oy >= self->ny)
                    continue;
                uint32_t o = (uint32_t)oy * (uint32_t)self->nx + (uint32_t)ox;
                for (uint32_t a = a0; a < a1; a++)
                    for (uint32_t b = self->start[o]; b < self->start[o + 1]; b++) {
                        uint32_t i = self->items[a], j = self->items[b];
                        if (i < j)
                            visit(ctx, i, j);
                        else
                            visit(ctx, j, i);
                    }
            }
        }
    }
}
