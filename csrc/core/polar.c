/* polar.c -- dynamic polarizability of one level of H0 in a field coupled
 * through D (a dipole operator):
 *   alpha(omega) = sum_{m outside the level} |D_mn|^2 [1/(w_mn - omega - i g/2) + 1/(w_mn + omega + i g/2)],
 * w_mn = E_m - E_n, g the width (0: real alpha). Two paths:
 *   spectral  every eigenpair of H0 (dense, or by sectors), the sum as
 *             written; the poles (w_mn with D_mn != 0) are known exactly;
 *   solves    (Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955)) for a large
 *             sparse H0: the level's eigenpair by Krylov, then two solves
 *             per frequency with the reduced resolvent (resolvent.c: a
 *             bordered LU or MINRES on the complement of the level),
 *               sum_m |D_mn|^2 / (E_m - E_n -+ omega) = <Dn| Q (H0 - E_n -+ omega)^{-1} Q |Dn>;
 *             real omega only (no width), and the nearest pole is the
 *             lowest excitation among the Krylov levels (a lower bound of
 *             the first resonance, which D may not reach).
 * METHODS.md section 1 (the Dalgarno-Lewis method). */
#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <string.h>
#include "internal.h"

#define POLAR_SPECTRAL_MAX 4000 /* states: above, a sparse H0 takes the solves */
#define POLAR_POLE_REL 1e-12    /* |omega - pole| below this x scale: on the pole */

typedef double complex dc;

/* s2[m] = |<m|D|level>|^2 for every eigenvector m of H0 (U: dense n x n
 * from lvs_eigen, dv: D's visible block); col, y: scratch of n each */
static int couplings(lvs_matrix *U, const lvs_matrix *dv, size_t n, size_t level, dc *col, dc *y,
                     double *s2) {
  const double *ua = lvs_matrix_data(U); /* dense, column-major */
  int uc = lvs_matrix_is_complex(U);
#define UAT(i, m) (uc ? CMPLX(ua[2 * ((i) + (m) * n)], ua[2 * ((i) + (m) * n) + 1]) : ua[(i) + (m) * n])
  for (size_t i = 0; i < n; i++) col[i] = UAT(i, level);
  int st = lvs_matrix_apply(dv, 1, (const double *)col, (double *)y);
  if (st) return st;
  for (size_t m = 0; m < n; m++) {
    dc s = 0;
    for (size_t i = 0; i < n; i++) s += conj(UAT(i, m)) * y[i];
    s2[m] = creal(s) * creal(s) + cimag(s) * cimag(s);
  }
#undef UAT
  return LVS_OK;
}

static int spectral(const lvs_matrix *h0, const lvs_matrix *d, size_t level, size_t nw, const double *om, double g,
                    double *re, double *im, lvs_polar_info *info) {
  lvs_ctx *ctx = h0->ctx;
  size_t n = lvs_matrix_rows(h0);
  double *E = lvsi_malloc(ctx, n * sizeof *E);
  dc *col = lvsi_malloc(ctx, 2 * n * sizeof *col), *y = col + n;
  double *s2 = lvsi_malloc(ctx, n * sizeof *s2);
  lvs_matrix *U = NULL, *dv = NULL;
  int st = LVS_OK;
  if (!E || !col || !s2) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "polarizability: out of memory");
    goto done;
  }
  if ((st = lvs_matrix_visible(d, 0, &dv))) goto done;
  if ((st = lvs_eigen(h0, 0, 1, E, &U))) goto done;
  double scale = fmax(fabs(E[0]), fabs(E[n - 1]));
  double tol = 1e-10 * (scale > 0 ? scale : 1.0);
  double En = E[level];
  if ((st = couplings(U, dv, n, level, col, y, s2))) goto done;
  double dmax = 0;
  for (size_t m = 0; m < n; m++) dmax = fmax(dmax, s2[m]);
  /* the poles: |w_mn| of the states D reaches outside the level */
  info->first_pole = INFINITY;
  info->poles = 0;
  for (size_t m = 0; m < n; m++) {
    if (fabs(E[m] - En) <= tol || s2[m] <= 1e-24 * dmax) continue;
    info->poles++;
    info->first_pole = fmin(info->first_pole, fabs(E[m] - En));
  }
  info->energy = En;
  for (size_t k = 0; k < nw; k++) {
    double w = om[k];
    dc a = 0;
    for (size_t m = 0; m < n; m++) {
      if (fabs(E[m] - En) <= tol || s2[m] == 0.0) continue; /* the level itself */
      double wm = E[m] - En;
      if (g == 0.0 && (fabs(wm - w) <= POLAR_POLE_REL * fmax(scale, 1.0) ||
                       fabs(wm + w) <= POLAR_POLE_REL * fmax(scale, 1.0))) {
        st = lvsi_fail(ctx, LVS_EINVAL,
                       "polarizability: omega = %.17g is on the resonance with level %zu (E_m - E_n = %.17g); give "
                       "width = gamma for the complex polarizability",
                       w, m + 1, wm);
        goto done;
      }
      a += s2[m] * (1.0 / (wm - w - I * g / 2) + 1.0 / (wm + w + I * g / 2));
    }
    re[k] = creal(a);
    im[k] = cimag(a);
  }
  info->path = 0;
done:
  lvsi_free(ctx, E);
  lvsi_free(ctx, col);
  lvsi_free(ctx, s2);
  lvs_matrix_free(U);
  lvs_matrix_free(dv);
  return st;
}

/* x = (e - H)^{-1} (r - pr P) for a real banded H (half-bandwidth kd):
 * LAPACK's banded LU with partial pivoting (dgbtrf/dgbtrs) */
static int band_solve(const lvs_matrix *h, long kd, double e, const dc *P, dc pr, const dc *r, dc *x) {
  lvs_ctx *ctx = h->ctx;
  size_t n = h->rows, ldab = 3 * (size_t)kd + 1;
  double *ab = lvsi_calloc(ctx, ldab * n, sizeof *ab), *b = lvsi_malloc(ctx, 2 * n * sizeof *b);
  lapack_int *ipiv = lvsi_malloc(ctx, n * sizeof *ipiv);
  int st = LVS_OK;
  if (!ab || !b || !ipiv) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "polarizability: out of memory for a banded solve");
    goto done;
  }
  /* band storage of dgbtrf: A(i, j) at ab[(2 kd + i - j) + j ldab] */
  for (size_t j = 0; j < n; j++) {
    ab[2 * kd + j * ldab] = e;
    for (size_t k = h->cp[j]; k < h->cp[j + 1]; k++) ab[(2 * kd + h->ri[k] - j) + j * ldab] -= h->a[k];
  }
  for (size_t i = 0; i < n; i++) {
    dc q = r[i] - pr * P[i];
    b[i] = creal(q);
    b[n + i] = cimag(q);
  }
  lapack_int N = (lapack_int)n, K = (lapack_int)kd;
  if (LAPACKE_dgbtrf_work(LAPACK_COL_MAJOR, N, N, K, K, ab, (lapack_int)ldab, ipiv) != 0 ||
      LAPACKE_dgbtrs_work(LAPACK_COL_MAJOR, 'N', N, K, K, 2, ab, (lapack_int)ldab, ipiv, b, N) != 0) {
    st = lvsi_fail(ctx, LVS_EINVAL, "polarizability: E_n +- omega = %.17g is on a level of H0 (a resonance)", e);
    goto done;
  }
  for (size_t i = 0; i < n; i++) x[i] = b[i] + I * b[n + i];
done:
  lvsi_free(ctx, ab);
  lvsi_free(ctx, b);
  lvsi_free(ctx, ipiv);
  return st;
}

static int solves(const lvs_matrix *h0, const lvs_matrix *d, size_t level, size_t nw, const double *om, double *re,
                  double *im, lvs_polar_info *info) {
  lvs_ctx *ctx = h0->ctx;
  size_t n = lvs_matrix_rows(h0), m = 0;
  double *E = lvsi_malloc(ctx, n * sizeof *E);
  dc *vec = NULL, *r = lvsi_malloc(ctx, 2 * n * sizeof *r), *x = r + n;
  lvs_matrix *hp = NULL, *dp = NULL;
  lvsi_resolvent *R = NULL;
  int st = LVS_OK;
  if (!E || !r) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "polarizability: out of memory");
    goto done;
  }
  if ((st = lvs_matrix_visible(h0, 0, &hp)) || (st = lvs_matrix_visible(d, 0, &dp))) goto done;
  double lo, hi;
  lvsi_gershgorin(hp, &lo, &hi);
  double tol = 1e-9 * fmax(fmax(fabs(lo), fabs(hi)), 1.0);
  long kd = lvsi_mat_bandwidth(hp);
  if (!hp->cplx && hp->sparse && kd >= 1 && kd <= 64 && level + 2 <= n) {
    /* real banded (a grid, an oscillator): the lowest levels by LAPACK's
     * band solver (dsbevx, values only: O(n kd^2)), then the level's vector
     * by shift-invert just below it (a banded LU, two or three products);
     * Lanczos on the bare op crawls when the spectrum is wide (x^4 on 6000
     * levels: 25 s) */
    m = level + 2;
    size_t ld = (size_t)kd + 1;
    double *ab = lvsi_calloc(ctx, ld * n, sizeof *ab);
    lapack_int *ifail = lvsi_malloc(ctx, n * sizeof *ifail), found = 0;
    if (!ab || !ifail) st = lvsi_fail(ctx, LVS_ENOMEM, "polarizability: out of memory");
    for (size_t j = 0; !st && j < n; j++)
      for (size_t k = hp->cp[j]; k < hp->cp[j + 1]; k++)
        if (hp->ri[k] >= j) ab[(hp->ri[k] - j) + j * ld] = hp->a[k];
    double q = 0, z = 0;
    if (!st && LAPACKE_dsbevx(LAPACK_COL_MAJOR, 'N', 'I', 'L', (lapack_int)n, (lapack_int)kd, ab, (lapack_int)ld, &q,
                              1, 0.0, 0.0, 1, (lapack_int)m, 2 * LAPACKE_dlamch('S'), &found, E, &z, 1, ifail) != 0)
      st = lvsi_fail(ctx, LVS_ELAPACK, "polarizability: dsbevx failed on the band of H0");
    if (!st && found != (lapack_int)m) st = lvsi_fail(ctx, LVS_ELAPACK, "polarizability: dsbevx found %d levels", (int)found);
    lvsi_free(ctx, ab);
    lvsi_free(ctx, ifail);
    if (st) goto done;
    for (size_t k = m; k < n; k++) E[k] = INFINITY;
    double below = level > 0 ? E[level] - E[level - 1] : INFINITY, above = E[level + 1] - E[level];
    double gap = fmin(below, above);
    if (gap > tol) { /* (a degenerate level is refused just below) */
      lvs_eigen_opts eo = {.method = LVS_EIGEN_KRYLOV, .has_near = 1, .near = E[level] - 1e-3 * gap};
      lvs_matrix *u = NULL;
      double ev;
      if ((st = lvs_eigen_ex(hp, NULL, 1, 1, &eo, &ev, &u))) goto done;
      if (!(vec = lvsi_calloc(ctx, n * m, sizeof *vec))) {
        lvs_matrix_free(u);
        st = lvsi_fail(ctx, LVS_ENOMEM, "polarizability: out of memory");
        goto done;
      }
      const double *ua = lvs_matrix_data(u);
      for (size_t i = 0; i < n; i++) vec[level * n + i] = lvs_matrix_is_complex(u) ? CMPLX(ua[2 * i], ua[2 * i + 1]) : ua[i];
      E[level] = ev;
      lvs_matrix_free(u);
    }
  } else if ((st = lvsi_lowest_levels(hp, level, tol, E, &vec, &m))) {
    goto done;
  }
  double En = E[level];
  size_t g0 = level, g1 = level + 1; /* the level's exact group */
  while (g0 > 0 && fabs(E[g0 - 1] - En) <= tol) g0--;
  while (g1 < m && fabs(E[g1] - En) <= tol) g1++;
  if (g1 - g0 > 1) {
    st = lvsi_fail(ctx, LVS_EINVAL,
                   "polarizability: level %zu is %zu-fold degenerate; the solves path takes a single level (a "
                   "degenerate level's polarizability is a matrix: use a model of at most %d states, or split the "
                   "degeneracy)",
                   level + 1, g1 - g0, POLAR_SPECTRAL_MAX);
    goto done;
  }
  const dc *P = vec + level * n;
  if ((st = lvs_matrix_apply(dp, 1, (const double *)P, (double *)r))) goto done;
  /* a lower bound of the first resonance: the nearest other Krylov level */
  info->first_pole = INFINITY;
  for (size_t k = 0; k < m; k++)
    if (k != level && isfinite(E[k])) info->first_pole = fmin(info->first_pole, fabs(E[k] - En));
  info->poles = 0;
  info->energy = En;
  /* Q r (r without its part along the level) for the banded solves */
  dc pr = 0;
  for (size_t i = 0; i < n; i++) pr += conj(P[i]) * r[i];
  for (size_t k = 0; k < nw && !st; k++) {
    double a = 0;
    for (int sg = -1; sg <= 1 && !st; sg += 2) {
      double e = En + sg * om[k]; /* Q (e - H0)^{-1} Q r, with e = E_n +- omega */
      if (om[k] != 0.0 && !hp->cplx && kd >= 1 && kd <= 64) {
        /* e is not the level: (e - H0) is invertible on the whole space and
         * commutes with Q, so one banded LU solve of (e - H0) x = Q r */
        if ((st = band_solve(hp, kd, e, P, pr, r, x))) break;
      } else {
        if ((st = lvsi_resolvent_new(hp, P, 1, e, 1, &R))) break;
        if ((st = lvsi_resolvent_solve(R, r, x))) break;
        lvsi_resolvent_free(R);
        R = NULL;
      }
      dc s = 0;
      for (size_t i = 0; i < n; i++) s += conj(r[i]) * x[i];
      a -= creal(s);
    }
    re[k] = a;
    im[k] = 0;
  }
  info->path = 1;
done:
  lvsi_resolvent_free(R);
  lvsi_free(ctx, E);
  lvsi_free(ctx, r);
  lvsi_free(ctx, vec);
  lvs_matrix_free(hp);
  lvs_matrix_free(dp);
  return st;
}

int lvs_polarizability(const lvs_matrix *h0, const lvs_matrix *d, size_t level, size_t nw, const double *omegas,
                       double width, int path, double *re, double *im, lvs_polar_info *info) {
  lvs_ctx *ctx = h0->ctx;
  memset(info, 0, sizeof *info);
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0) || lvs_matrix_rows(d) != n || lvs_matrix_cols(d) != n)
    return lvsi_fail(ctx, LVS_EDIM, "polarizability: H0 and D must be square ops of one size");
  if (level >= n) return lvsi_fail(ctx, LVS_ERANGE, "polarizability: level %zu is out of range 1..%zu", level + 1, n);
  if (!(width >= 0) || !isfinite(width))
    return lvsi_fail(ctx, LVS_EINVAL, "polarizability: width must be finite and >= 0");
  for (size_t k = 0; k < nw; k++)
    if (!isfinite(omegas[k])) return lvsi_fail(ctx, LVS_EINVAL, "polarizability: omega %zu is not finite", k + 1);
  int st;
  if ((st = lvsi_check_hermitian(h0, LVS_DEFAULT_HERM_TOL, "H0")) || (st = lvsi_check_hermitian(d, LVS_DEFAULT_HERM_TOL, "D")))
    return st;
  int sparse_big = lvs_matrix_is_sparse(h0) && n > POLAR_SPECTRAL_MAX;
  if (path == 0) path = sparse_big ? 2 : 1;
  if (path == 2 && width > 0)
    return lvsi_fail(ctx, LVS_EINVAL,
                     "polarizability: a width needs the spectral path (every eigenpair); the solves path is for real "
                     "omega");
  if (path == 1) return spectral(h0, d, level, nw, omegas, width, re, im, info);
  return solves(h0, d, level, nw, omegas, re, im, info);
}

/* ---- frequencies where two levels have the same polarizability --------
 * ("magic" frequencies of an optical trap: the light shift of the two
 * levels is equal, so their transition does not move). alpha_a - alpha_b is
 * continuous between the poles of either level; it is sampled on `steps`
 * intervals of [from, to] cut at every pole, and each sign change inside a
 * pole-free piece is refined by bisection to the last bit. Zeros that
 * touch without a sign change, or two inside one piece, are missed: more
 * steps find them. Spectral data only (every eigenpair). */

typedef struct {
  size_t n;
  const double *E;
  const double *s2; /* |D_ma|^2 */
  double Ea, tol;
} pol_level;

static double alpha_at(const pol_level *p, double w) {
  double a = 0;
  for (size_t m = 0; m < p->n; m++) {
    double wm = p->E[m] - p->Ea;
    if (fabs(wm) <= p->tol || p->s2[m] == 0.0) continue;
    a += p->s2[m] * (1.0 / (wm - w) + 1.0 / (wm + w));
  }
  return a;
}

static double diff_at(const pol_level *a, const pol_level *b, double w) { return alpha_at(a, w) - alpha_at(b, w); }

static int cmp_dbl_pol(const void *x, const void *y) {
  double a = *(const double *)x, b = *(const double *)y;
  return (a > b) - (a < b);
}

int lvs_polar_magic(const lvs_matrix *h0, const lvs_matrix *d, size_t la, size_t lb, double from, double to,
                    size_t steps, double *out, size_t cap, size_t *nout) {
  lvs_ctx *ctx = h0->ctx;
  *nout = 0;
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0) || lvs_matrix_rows(d) != n || lvs_matrix_cols(d) != n)
    return lvsi_fail(ctx, LVS_EDIM, "magic_frequencies: H0 and D must be square ops of one size");
  if (la >= n || lb >= n || la == lb)
    return lvsi_fail(ctx, LVS_ERANGE, "magic_frequencies: levels must be two different levels from 1 to %zu", n);
  if (!(isfinite(from) && isfinite(to) && from >= 0 && to > from))
    return lvsi_fail(ctx, LVS_EINVAL, "magic_frequencies: need 0 <= from < to, both finite");
  if (steps < 1 || steps > 10000000)
    return lvsi_fail(ctx, LVS_EINVAL, "magic_frequencies: steps must be from 1 to 1e7");
  int st = lvsi_dense_ok(ctx, n, n, 16, "magic_frequencies (every eigenpair)");
  if (st) return st;
  if ((st = lvsi_check_hermitian(h0, LVS_DEFAULT_HERM_TOL, "H0")) || (st = lvsi_check_hermitian(d, LVS_DEFAULT_HERM_TOL, "D")))
    return st;
  double *E = lvsi_malloc(ctx, n * sizeof *E), *s2 = lvsi_malloc(ctx, 2 * n * sizeof *s2), *poles = NULL;
  dc *col = lvsi_malloc(ctx, 2 * n * sizeof *col), *y = col + n;
  lvs_matrix *U = NULL, *dv = NULL;
  if (!E || !s2 || !col) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "magic_frequencies: out of memory");
    goto done;
  }
  if ((st = lvs_matrix_visible(d, 0, &dv)) || (st = lvs_eigen(h0, 0, 1, E, &U))) goto done;
  double scale = fmax(fmax(fabs(E[0]), fabs(E[n - 1])), 1.0), tol = 1e-10 * scale;
  if ((st = couplings(U, dv, n, la, col, y, s2)) || (st = couplings(U, dv, n, lb, col, y, s2 + n))) goto done;
  pol_level A = {n, E, s2, E[la], tol}, B = {n, E, s2 + n, E[lb], tol};
  /* the poles of both levels inside (from, to), sorted */
  if (!(poles = lvsi_malloc(ctx, (2 * n + 1) * sizeof *poles))) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "magic_frequencies: out of memory");
    goto done;
  }
  size_t np = 0;
  for (int q = 0; q < 2; q++) {
    const pol_level *p = q ? &B : &A;
    for (size_t m = 0; m < n; m++) {
      double wm = fabs(E[m] - p->Ea);
      if (wm > tol && p->s2[m] > 0 && wm > from && wm < to) poles[np++] = wm;
    }
  }
  qsort(poles, np, sizeof *poles, cmp_dbl_pol);
  size_t pi = 0;
  double h = (to - from) / (double)steps, eps = 1e-9 * scale;
  for (size_t k = 0; k < steps && *nout < cap; k++) {
    double x0 = from + h * (double)k, x1 = k + 1 == steps ? to : from + h * (double)(k + 1);
    /* pieces of [x0, x1] between the poles inside it */
    double lo = x0;
    for (;;) {
      while (pi < np && poles[pi] <= lo) pi++;
      double hi = (pi < np && poles[pi] < x1) ? poles[pi] : x1;
      double a = lo, b = hi;
      if (a > x0 || (pi > 0 && fabs(a - poles[pi - 1]) < eps)) a += eps; /* off the poles */
      if (hi < x1) b -= eps;
      if (b > a) {
        double fa = diff_at(&A, &B, a), fb = diff_at(&A, &B, b);
        if (fa == 0.0) {
          if (*nout < cap) out[(*nout)++] = a;
        } else if (fa * fb < 0) {
          for (int it = 0; it < 200; it++) { /* bisection to the last bit */
            double c = 0.5 * (a + b);
            if (c <= a || c >= b) break;
            double fc = diff_at(&A, &B, c);
            if (fc == 0.0) {
              a = b = c;
              break;
            }
            if ((fc < 0) == (fa < 0)) a = c, fa = fc;
            else b = c;
          }
          if (*nout < cap) out[(*nout)++] = 0.5 * (a + b);
        }
      }
      if (hi >= x1) break;
      lo = hi;
      pi++;
    }
  }
done:
  lvsi_free(ctx, E);
  lvsi_free(ctx, s2);
  lvsi_free(ctx, col);
  lvsi_free(ctx, poles);
  lvs_matrix_free(U);
  lvs_matrix_free(dv);
  return st;
}
