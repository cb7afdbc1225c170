/* charge.c -- the charge basis of a superconducting island: states |n>,
 * n = -N..N Cooper pairs (or any integer-spaced number conjugate to a
 * 2 pi-periodic phase), with n, n^2 and the functions of the phase that are
 * exact on the kept states:
 *   e^{i phi} |n> = |n + 1>    (phi and n conjugate, [phi, n] = i)
 *   cos phi = (e^{i phi} + e^{-i phi}) / 2:  <n +- 1|cos phi|n> = 1/2
 *   sin phi = (e^{i phi} - e^{-i phi}) / (2i): <n + 1|sin phi|n> = -i/2,
 *                                               <n - 1|sin phi|n> = +i/2
 *   cos 2phi:  <n +- 2|cos 2phi|n> = 1/2
 * (the charge-basis Cooper-pair box of Bouchiat et al., Phys. Scr. T76, 165
 * (1998), and Koch et al., Phys. Rev. A 76, 042319 (2007), eq. (2.1)). The
 * matrix elements are exact; only the truncation at |n| = N is an
 * approximation, and a product of two of them (cos * cos) misses the
 * states past the edge, which is why cos2 is its own operator. */
#include <math.h>
#include <string.h>
#include "internal.h"

#define CHARGE_MAX_N 1000000

enum { P_N = 0 };

static int charge_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band);

int lvs_basis_charge(lvs_ctx *ctx, long N, lvs_basis **out) {
  *out = NULL;
  if (N < 1) return lvsi_fail(ctx, LVS_EINVAL, "charge basis needs N >= 1 (states n = -N..N), got %ld", N);
  if (N > CHARGE_MAX_N)
    return lvsi_fail(ctx, LVS_ECAP, "charge basis N = %ld is too large (at most %d)", N, CHARGE_MAX_N);
  size_t n = 2 * (size_t)N + 1;
  static const char *const names[] = {"n"};
  double par[1] = {(double)N};
  int st = lvsi_basis_new_kind(ctx, LVS_BASIS_CHARGE, n, 1, names, charge_op, par, 1, out);
  if (st) return st;
  for (size_t s = 0; s < n; s++) lvsi_basis_set_label(*out, s, 0, (double)((long)s - N));
  return LVS_OK;
}

static int charge_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band) {
  lvs_ctx *ctx = lvsi_basis_ctx(b);
  long N = (long)lvsi_basis_par(b)[P_N];
  size_t n = lvs_basis_dim(b);
  int which = !strcmp(name, "n") ? 0 : !strcmp(name, "n2") ? 1 : !strcmp(name, "cos") ? 2
            : !strcmp(name, "sin") ? 3 : !strcmp(name, "cos2") ? 4 : !strcmp(name, "raise") ? 5
            : !strcmp(name, "lower") ? 6 : -1;
  *out = NULL;
  if (which < 0)
    return lvsi_fail(ctx, LVS_EINVAL,
                     "charge basis has no operator '%s' (it has n, n2, cos, sin, cos2, raise, lower, identity)",
                     name);
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, n, n, which == 3, 1, 2 * n + 1, &c);
  if (st) return st;
  for (size_t j = 0; j < n && !st; j++) { /* column j = state n_j = j - N */
    double nj = (double)((long)j - N);
    c->cp[j] = c->nnz;
    switch (which) {
      case 0: if (nj != 0.0) st = lvsi_csc_push(c, j, nj); break;
      case 1: if (nj != 0.0) st = lvsi_csc_push(c, j, nj * nj); break;
      case 2:
        if (j > 0) st = lvsi_csc_push(c, j - 1, 0.5);
        if (!st && j + 1 < n) st = lvsi_csc_push(c, j + 1, 0.5);
        break;
      case 3: /* rows ascending: <n-1|sin|n> = i/2, then <n+1|sin|n> = -i/2 */
        if (j > 0) st = lvsi_csc_push(c, j - 1, 0.5 * I);
        if (!st && j + 1 < n) st = lvsi_csc_push(c, j + 1, -0.5 * I);
        break;
      case 4:
        if (j > 1) st = lvsi_csc_push(c, j - 2, 0.5);
        if (!st && j + 2 < n) st = lvsi_csc_push(c, j + 2, 0.5);
        break;
      case 5: if (j + 1 < n) st = lvsi_csc_push(c, j + 1, 1.0); break; /* e^{i phi}: n -> n + 1 */
      case 6: if (j > 0) st = lvsi_csc_push(c, j - 1, 1.0); break;     /* e^{-i phi} */
    }
  }
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  c->cp[n] = c->nnz;
  *band = which == 4 ? 2 : which <= 1 ? 0 : 1;
  *out = c;
  return LVS_OK;
}
