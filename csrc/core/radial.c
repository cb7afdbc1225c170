/* radial.c -- finite-difference radial Hamiltonians on a uniform grid.
 *
 * For the reduced radial function u(r) = r R(r) of a particle (mass 1,
 * hbar = 1, atomic units for hydrogen-like charge Z) with angular momentum l:
 *     H_l u = -u''/2 + l(l+1)/(2 r^2) u - Z u / r,
 * on r_i = i h, i = 1..n, h = rmax/(n+1), with u(0) = u(rmax) = 0 and the
 * three-point second difference, so H_l is symmetric tridiagonal:
 *     H_ii = 1/h^2 + l(l+1)/(2 r_i^2) - Z/r_i,   H_i,i+1 = -1/(2 h^2).
 * source: common practice (three-point finite differences; the eigenvalues
 * approach -Z^2/(2 n^2) with O(h^2) error). The grid vectors are plain
 * (unit 2-norm) vectors; for a normalized u multiply by 1/sqrt(h). The
 * operators come back sparse with their true bandwidth recorded (1 for H,
 * 0 for r). Several channels l_1, l_2, ... come as one block-diagonal H
 * (channel c on indices c n .. c n + n - 1), built in place. */
#include <math.h>
#include <stdint.h>
#include "internal.h"

int lvs_radial_channels(lvs_ctx *ctx, size_t n, double rmax, const int *l, size_t nl,
                        double charge, lvs_matrix **h_out, lvs_matrix **r_out) {
  if (h_out) *h_out = NULL;
  if (r_out) *r_out = NULL;
  if (n < 2) return lvsi_fail(ctx, LVS_EINVAL, "radial grid needs at least 2 points, got %zu", n);
  if (!(rmax > 0) || !isfinite(rmax))
    return lvsi_fail(ctx, LVS_EINVAL, "radial grid rmax must be positive and finite, got %g", rmax);
  if (h_out && nl == 0) return lvsi_fail(ctx, LVS_EINVAL, "radial grid needs at least one channel l");
  for (size_t c = 0; h_out && c < nl; c++)
    if (l[c] < 0) return lvsi_fail(ctx, LVS_EINVAL, "angular momentum l must be >= 0, got %d", l[c]);
  if (!isfinite(charge)) return lvsi_fail(ctx, LVS_EINVAL, "charge must be finite");
  if (h_out && nl > SIZE_MAX / 4 / n)
    return lvsi_fail(ctx, LVS_ERANGE, "radial grid of %zu channels x %zu points is too large", nl, n);
  double h = rmax / (double)(n + 1);
  double off = -0.5 / (h * h);
  lvs_matrix *H = NULL, *R = NULL;
  int st;
  if (h_out) {
    /* channel c, column j: entries at c per + (j ? 3 j - 1 : 0), rows
     * (c n + j) - 1, c n + j, c n + j + 1 within the channel; written column
     * by column of every channel at once (one 1/r per grid point) */
    size_t per = 3 * n - 2, N = nl * n;
    if ((st = lvsi_mat_alloc(ctx, N, N, 0, 1, nl * per, &H))) return st;
    for (size_t j = 0; j < n; j++) {
      double r = h * (double)(j + 1);
      double base = 1.0 / (h * h) - charge / r, inv_r2 = 1.0 / (r * r);
      for (size_t c = 0; c < nl; c++) {
        size_t col = c * n + j, k = c * per + (j ? 3 * j - 1 : 0);
        H->cp[col] = k;
        if (j > 0) {
          H->ri[k] = col - 1;
          H->a[k++] = off;
        }
        H->ri[k] = col;
        H->a[k++] = base + 0.5 * (double)l[c] * (double)(l[c] + 1) * inv_r2;
        if (j + 1 < n) {
          H->ri[k] = col + 1;
          H->a[k] = off;
        }
      }
    }
    H->cp[N] = H->nnz = nl * per;
    H->band = 1;
  }
  if (r_out) {
    if ((st = lvsi_mat_alloc(ctx, n, n, 0, 1, n, &R))) {
      lvs_matrix_free(H);
      return st;
    }
    for (size_t j = 0; j < n; j++) {
      R->cp[j] = j;
      R->ri[j] = j;
      R->a[j] = h * (double)(j + 1);
    }
    R->cp[n] = R->nnz = n;
    R->band = 0;
  }
  if (h_out) *h_out = H;
  if (r_out) *r_out = R;
  return LVS_OK;
}

int lvs_radial(lvs_ctx *ctx, size_t n, double rmax, int l, double charge, lvs_matrix **h_out,
               lvs_matrix **r_out) {
  return lvs_radial_channels(ctx, n, rmax, &l, 1, charge, h_out, r_out);
}
