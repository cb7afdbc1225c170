/* box.c -- particle in an infinite square well (hbar = 1).
 *
 * States n = 1..N, psi_n(x) = sqrt(2/L) sin(n pi (x - x0)/L) on the box
 * [x0, x0 + L]; x0 = 0 (walls at 0 and L) or x0 = -L/2 (centered box).
 * E_n = n^2 pi^2 / (2 m L^2).
 *
 * Closed-form matrix elements with u = x - x0 in [0, L] (source: direct
 * integration of products of sines, e.g. Griffiths, Introduction to Quantum
 * Mechanics, 2nd ed. 2005, problems 2.4 and 6.x; rechecked by quadrature in
 * tests/c/test_box.c):
 *   <n|u|n>   = L/2
 *   <m|u|n>   = -8 L m n / (pi^2 (m^2 - n^2)^2)           m + n odd, else 0
 *   <n|u^2|n> = L^2 (1/3 - 1/(2 n^2 pi^2))
 *   <m|u^2|n> = (-1)^(m+n) 8 L^2 m n / (pi^2 (m^2 - n^2)^2)
 *   <m|p|n>   = -4 i m n / (L (m^2 - n^2))                m + n odd, else 0
 *   <m|p^2|n> = (n pi / L)^2 delta_mn
 * x = x0 + u, so x and x^2 follow. The p elements satisfy
 * <m|p|n> = i m (E_m - E_n) <m|x|n> (p = i m [H, x]).
 *
 * Potentials. <m|V|n> = (2/L) int_0^L V sin(m pi u/L) sin(n pi u/L) du
 *                    = c_|m-n| - c_(m+n),  c_k = (1/L) int_0^L V cos(k pi u/L) du,
 * so 2N + 1 cosine moments give the whole matrix. The moments come from
 * composite 16-point Gauss-Legendre on panels no wider than one wavelength
 * of cos(2N pi u/L) (the rule is exact to ~1e-30 for that cosine alone), the
 * panels doubled until two successive grids agree to tol * max|V| (default
 * 1e-12), starting from max(N, 32) panels; the finer result is returned.
 * A feature narrower than the first grid's spacing can be missed by both
 * grids alike, so break points should bracket it. Break points split the panels at
 * jumps or kinks of V so that piecewise-smooth potentials converge just as
 * fast. A potential that is not smooth between break points is refused
 * with LVS_ENOCONV once the grid passes LVS_BOX_MAX_POINTS.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

enum { P_WIDTH = 0, P_MASS = 1, P_X0 = 2 };
#define GL_Q 16
#define BOX_MAX_N 100000

static int box_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band);

int lvs_basis_box(lvs_ctx *ctx, size_t n, double width, double mass, int centered, lvs_basis **out) {
  *out = NULL;
  if (n < 1) return lvsi_fail(ctx, LVS_EINVAL, "box basis size must be at least 1");
  if (n > BOX_MAX_N) return lvsi_fail(ctx, LVS_ECAP, "box basis of %zu states is too large (at most %d)", n, BOX_MAX_N);
  if (!(width > 0) || !isfinite(width))
    return lvsi_fail(ctx, LVS_EINVAL, "box width must be positive and finite, got %g", width);
  if (!(mass > 0) || !isfinite(mass))
    return lvsi_fail(ctx, LVS_EINVAL, "box mass must be positive and finite, got %g", mass);
  static const char *const names[] = {"n"};
  double par[3] = {width, mass, centered ? -width / 2 : 0.0};
  int st = lvsi_basis_new_kind(ctx, LVS_BASIS_BOX, n, 1, names, box_op, par, 3, out);
  if (st) return st;
  for (size_t i = 0; i < n; i++) lvsi_basis_set_label(*out, i, 0, (double)(i + 1));
  return LVS_OK;
}

int lvs_box_params(const lvs_basis *b, double *width, double *mass, double *x0) {
  if (lvs_basis_kind_of(b) != LVS_BASIS_BOX)
    return lvsi_fail(lvsi_basis_ctx(b), LVS_EINVAL, "the basis is not a box");
  const double *p = lvsi_basis_par(b);
  if (width) *width = p[P_WIDTH];
  if (mass) *mass = p[P_MASS];
  if (x0) *x0 = p[P_X0];
  return LVS_OK;
}

/* closed-form elements (1-based m, n) of u = x - x0 and u^2 */
static double u1(double L, long m, long n) {
  if (m == n) return L / 2;
  if (((m + n) & 1) == 0) return 0.0;
  double d = (double)(m * m - n * n);
  return -8.0 * L * (double)m * (double)n / (M_PI * M_PI * d * d);
}
static double u2(double L, long m, long n) {
  if (m == n) return L * L * (1.0 / 3.0 - 1.0 / (2.0 * (double)(n * n) * M_PI * M_PI));
  double d = (double)(m * m - n * n);
  double v = 8.0 * L * L * (double)m * (double)n / (M_PI * M_PI * d * d);
  return ((m + n) & 1) ? -v : v;
}

static int box_op(const lvs_basis *b, const char *name, lvs_matrix **out, long *band) {
  lvs_ctx *ctx = lvsi_basis_ctx(b);
  const double *p = lvsi_basis_par(b);
  double L = p[P_WIDTH], mass = p[P_MASS], x0 = p[P_X0];
  size_t n = lvs_basis_dim(b);
  int which = !strcmp(name, "H0") ? 0 : !strcmp(name, "x") ? 1 : !strcmp(name, "p") ? 2
            : !strcmp(name, "x2") ? 3 : !strcmp(name, "p2") ? 4 : -1;
  *out = NULL;
  if (which < 0)
    return lvsi_fail(ctx, LVS_EINVAL, "box has no operator '%s' (it has H0, x, p, x2, p2, identity)", name);
  int diag = which == 0 || which == 4;
  size_t cap = diag ? n : (n / 2 + 1) * n + n;
  if (!diag) {
    int st = lvsi_dense_ok(ctx, n, n, which == 2 ? 2 * sizeof(double) : sizeof(double), "box operator");
    if (st) return st;
  }
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, n, n, which == 2, 1, cap, &c);
  if (st) return st;
  for (size_t j = 0; j < n && !st; j++) {
    long nn = (long)j + 1;
    c->cp[j] = c->nnz;
    if (diag) {
      double k = (double)nn * M_PI / L;
      st = lvsi_csc_push(c, j, which == 0 ? k * k / (2.0 * mass) : k * k);
      continue;
    }
    for (size_t i = 0; i < n && !st; i++) {
      long mm = (long)i + 1;
      double complex v;
      switch (which) {
        case 1: v = u1(L, mm, nn) + (mm == nn ? x0 : 0.0); break;
        case 2:
          v = (mm + nn) & 1 ? -4.0 * I * (double)mm * (double)nn / (L * (double)(mm * mm - nn * nn)) : 0.0;
          break;
        default:
          v = u2(L, mm, nn) + 2.0 * x0 * u1(L, mm, nn) + (mm == nn ? x0 * x0 : 0.0);
          break;
      }
      if (v != 0.0) st = lvsi_csc_push(c, i, v);
    }
  }
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  c->cp[n] = c->nnz;
  *band = diag ? 0 : (long)n;
  *out = c;
  return LVS_OK;
}

/* Gauss-Legendre nodes t and weights w on [-1, 1], q points, by Newton on
 * P_q from the Tricomi start cos(pi (i - 1/4)/(q + 1/2)) (common practice;
 * Abramowitz & Stegun 25.4.29 for the rule). */
static void gauss_legendre(int q, double *t, double *w) {
  for (int i = 0; i < (q + 1) / 2; i++) {
    double z = cos(M_PI * (i + 0.75) / (q + 0.5)), dp = 1.0;
    for (int it = 0; it < 100; it++) {
      double p0 = 1.0, p1 = 0.0;
      for (int k = 1; k <= q; k++) {
        double p2 = p1;
        p1 = p0;
        p0 = ((2.0 * k - 1.0) * z * p1 - (k - 1.0) * p2) / k;
      }
      dp = q * (z * p0 - p1) / (z * z - 1.0);
      double dz = p0 / dp;
      z -= dz;
      if (fabs(dz) < 1e-16) break;
    }
    t[i] = -z;
    t[q - 1 - i] = z;
    w[i] = w[q - 1 - i] = 2.0 / ((1.0 - z * z) * dp * dp);
  }
}

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* Cosine moments c_0..c_K of f on the grid with `panels` panels spread over
 * the intervals between edges (u coordinates, ne + 1 edges). */
static int moments(lvs_ctx *ctx, lvs_real_fn f, void *ud, double L, double x0, const double *edges,
                   size_t ne, size_t panels, size_t K, double *c, double *vmax) {
  double t[GL_Q], w[GL_Q];
  gauss_legendre(GL_Q, t, w);
  /* panels per interval, proportional to its length, at least 1 */
  size_t npts = 0;
  size_t *pk = lvsi_malloc(ctx, ne * sizeof(size_t));
  if (!pk) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in box potential");
  for (size_t i = 0; i < ne; i++) {
    double frac = (edges[i + 1] - edges[i]) / L;
    pk[i] = (size_t)ceil(frac * (double)panels);
    if (pk[i] < 1) pk[i] = 1;
    npts += pk[i] * GL_Q;
  }
  double *x = lvsi_malloc(ctx, npts * sizeof(double));
  double *wt = lvsi_malloc(ctx, npts * sizeof(double));
  double *fx = lvsi_malloc(ctx, npts * sizeof(double));
  if (!x || !wt || !fx) {
    lvsi_free(ctx, pk);
    lvsi_free(ctx, x);
    lvsi_free(ctx, wt);
    lvsi_free(ctx, fx);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in box potential (%zu points)", npts);
  }
  size_t k = 0;
  for (size_t i = 0; i < ne; i++) {
    double h = (edges[i + 1] - edges[i]) / (double)pk[i];
    for (size_t pnl = 0; pnl < pk[i]; pnl++) {
      double a = edges[i] + h * (double)pnl;
      for (int q = 0; q < GL_Q; q++, k++) {
        x[k] = a + 0.5 * h * (t[q] + 1.0); /* u coordinate for now */
        wt[k] = 0.5 * h * w[q] / L;
      }
    }
  }
  lvsi_free(ctx, pk);
  for (size_t i = 0; i < npts; i++) x[i] += x0; /* the caller's coordinate */
  int st = LVS_OK;
  if (f(ud, npts, x, fx) != 0) {
    st = lvsi_fail(ctx, LVS_EINVAL, "the potential function failed");
    goto done;
  }
  *vmax = 0.0;
  for (size_t i = 0; i < npts; i++) {
    if (!isfinite(fx[i])) {
      st = lvsi_fail(ctx, LVS_EINVAL, "the potential is %s at x = %.17g", isnan(fx[i]) ? "NaN" : "infinite", x[i]);
      goto done;
    }
    if (fabs(fx[i]) > *vmax) *vmax = fabs(fx[i]);
  }
  for (size_t kk = 0; kk <= K; kk++) c[kk] = 0.0;
  /* c_k += w f cos(k theta) by complex rotation, re-seeded every 64 steps
   * (error grows ~ 64 eps instead of k eps) */
  for (size_t i = 0; i < npts; i++) {
    double th = M_PI * (x[i] - x0) / L, wf = wt[i] * fx[i];
    double cr = cos(th), sr = sin(th);
    double zr = 1.0, zi = 0.0;
    for (size_t kk = 0; kk <= K; kk++) {
      if ((kk & 63) == 0) {
        zr = cos(th * (double)kk);
        zi = sin(th * (double)kk);
      }
      c[kk] += wf * zr;
      double nr = zr * cr - zi * sr;
      zi = zr * sr + zi * cr;
      zr = nr;
    }
  }
done:
  lvsi_free(ctx, x);
  lvsi_free(ctx, wt);
  lvsi_free(ctx, fx);
  return st;
}

int lvs_box_potential(const lvs_basis *b, lvs_real_fn f, void *ud, const lvs_box_quad *opt,
                      lvs_matrix **out, double *err) {
  lvs_ctx *ctx = lvsi_basis_ctx(b);
  *out = NULL;
  if (err) *err = 0.0;
  if (lvs_basis_kind_of(b) != LVS_BASIS_BOX) return lvsi_fail(ctx, LVS_EINVAL, "the basis is not a box");
  if (!f) return lvsi_fail(ctx, LVS_EINVAL, "no potential function given");
  const double *p = lvsi_basis_par(b);
  double L = p[P_WIDTH], x0 = p[P_X0];
  size_t n = lvs_basis_dim(b), K = 2 * n;
  double tol = opt && opt->tol > 0 ? opt->tol : LVS_DEFAULT_BOX_TOL;
  if (opt && !(opt->tol >= 0 && opt->tol < 1))
    return lvsi_fail(ctx, LVS_EINVAL, "quadrature tolerance must be in [0, 1), got %g", opt->tol);
  size_t nb = opt ? opt->nbreaks : 0;
  if (nb > 10000) return lvsi_fail(ctx, LVS_EINVAL, "too many break points (%zu, at most 10000)", nb);
  int st = lvsi_dense_ok(ctx, n, n, sizeof(double), "box potential");
  if (st) return st;
  double *edges = lvsi_malloc(ctx, (nb + 2) * sizeof(double));
  double *c1 = lvsi_malloc(ctx, (K + 1) * sizeof(double));
  double *c2 = lvsi_malloc(ctx, (K + 1) * sizeof(double));
  lvs_matrix *v = NULL;
  if (!edges || !c1 || !c2) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in box potential");
    goto done;
  }
  edges[0] = 0.0;
  for (size_t i = 0; i < nb; i++) {
    double u = opt->breaks[i] - x0;
    if (!(u > 0 && u < L)) {
      st = lvsi_fail(ctx, LVS_EINVAL, "break point %zu (x = %g) is not inside the box (%g, %g)", i + 1,
                     opt->breaks[i], x0, x0 + L);
      goto done;
    }
    edges[i + 1] = u;
  }
  qsort(edges + 1, nb, sizeof(double), cmp_double);
  edges[nb + 1] = L;
  /* drop repeated break points */
  size_t ne = 0;
  for (size_t i = 1; i <= nb + 1; i++)
    if (edges[i] > edges[ne]) edges[++ne] = edges[i];
  size_t panels = n < 32 ? 32 : n; /* first grid: 16 max(N, 32) points */
  double vmax = 0.0, vmax2 = 0.0, diff = 0.0;
  if ((st = moments(ctx, f, ud, L, x0, edges, ne, panels, K, c1, &vmax))) goto done;
  for (;;) {
    panels *= 2;
    if ((panels + ne) * GL_Q > LVS_BOX_MAX_POINTS) {
      st = lvsi_fail(ctx, LVS_ENOCONV,
                     "quadrature did not converge (successive grids differ by %.3g, max|V| = %.3g); if V(x) "
                     "jumps or has a kink, give those points as breaks",
                     diff, vmax);
      goto done;
    }
    if ((st = moments(ctx, f, ud, L, x0, edges, ne, panels, K, c2, &vmax2))) goto done;
    if (vmax2 > vmax) vmax = vmax2;
    diff = 0.0;
    for (size_t k = 0; k <= K; k++) diff = fmax(diff, fabs(c2[k] - c1[k]));
    double *tmp = c1;
    c1 = c2;
    c2 = tmp;
    if (diff <= tol * vmax) break;
  }
  if ((st = lvsi_mat_alloc(ctx, n, n, 0, 0, 0, &v))) goto done;
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      size_t d = i > j ? i - j : j - i, s = i + j + 2;
      v->a[i + j * n] = c1[d] - c1[s];
    }
  if (err) *err = 2.0 * diff;
done:
  lvsi_free(ctx, edges);
  lvsi_free(ctx, c1);
  lvsi_free(ctx, c2);
  if (st) {
    lvs_matrix_free(v);
    return st;
  }
  *out = v;
  return LVS_OK;
}
