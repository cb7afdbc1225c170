/* solve_series.c -- Rayleigh-Schroedinger series of one level of a large
 * sparse or banded H0 by linear solves (Dalgarno & Lewis, Proc. R. Soc. A
 * 233, 70 (1955); Sternheimer, Phys. Rev. 84, 244 (1951)).
 *
 * Only one eigenpair (E_n, n) of H0 is needed: no spectrum, no dense
 * matrix. With intermediate normalization <n|psi(k)> = 0 (Hirschfelder,
 * Byers Brown, Epstein, Adv. Quantum Chem. 1, 255 (1964)):
 *     E(k)  = <n|V|psi(k-1)>
 *     (E_n - H0) psi(k) = Q [V psi(k-1) - sum_{j=1..k} E(j) psi(k-j)],
 * Q = 1 - |n><n|. A = E_n - H0 is singular along n, so we solve with the
 * one-element shift of METHODS.md 1(a): M = H0 - E_n + sigma e_p e_p^T,
 * p = argmax |n_p|, sigma = max_i |H0_ii - E_n|; then M y = -Q rhs has
 * y_p = 0 and (H0 - E_n) y = -Q rhs exactly, and psi(k) = y - n (n.y).
 * M keeps the band of H0, so it is factored once (a twisted L D L^T for a
 * tridiagonal M that is positive definite, as it is for the lowest level;
 * dgttrf otherwise; dpbtrf/dgbtrf for wider bands) and each order costs one
 * O(n b) solve plus one product with V (sparse).
 *
 * The eigenpair is computed when not given: Sturm-count multisection and
 * Rayleigh-quotient iteration (tridiagonal), or dsbevx (values only) plus
 * inverse iteration for a wider band. Real symmetric H0 and V only. */
#include <float.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

#define MAXD(a, b) ((a) > (b) ? (a) : (b))
#define MIND(a, b) ((a) < (b) ? (a) : (b))

struct lvs_dlseries {
  lvs_ctx *ctx;
  size_t n;
  int order;
  double *E;   /* E(0..order) */
  double *psi; /* psi(0..order-1), n each, column k at psi + k n */
  size_t band;
  double gap;  /* distance to the nearest other level (computed pairs), or NAN */
  const char *solver;
};

/* four partial sums: the additions pipeline (one chain would wait for
 * each) */
static double dot(size_t n, const double *x, const double *y) {
  double s0 = 0.0, s1 = 0.0, s2 = 0.0, s3 = 0.0;
  size_t i = 0;
  for (; i + 4 <= n; i += 4) {
    s0 += x[i] * y[i];
    s1 += x[i + 1] * y[i + 1];
    s2 += x[i + 2] * y[i + 2];
    s3 += x[i + 3] * y[i + 3];
  }
  for (; i < n; i++) s0 += x[i] * y[i];
  return (s0 + s1) + (s2 + s3);
}

/* index of the largest |x_i| (the first of equals); the best value kept in
 * a register (a reload of x[p] would chain every step to the last update) */
static size_t argmax_abs(size_t n, const double *x) {
  size_t p = 0;
  double best = n ? fabs(x[0]) : 0.0;
  for (size_t i = 1; i < n; i++) {
    double v = fabs(x[i]);
    if (v > best) {
      best = v;
      p = i;
    }
  }
  return p;
}

/* max_i |hb_ii - E| over the diagonal of lower band storage (leading
 * dimension ld), four partial maxima */
static double max_diag_dist(size_t n, const double *hb, size_t ld, double E) {
  double m[4] = {0, 0, 0, 0};
  for (size_t i = 0; i < n; i++) {
    double v = fabs(hb[i * ld] - E);
    if (v > m[i & 3]) m[i & 3] = v;
  }
  return MAXD(MAXD(m[0], m[1]), MAXD(m[2], m[3]));
}

void lvs_dlseries_free(lvs_dlseries *s) {
  if (!s) return;
  lvs_ctx *ctx = s->ctx;
  lvsi_free(ctx, s->E);
  lvsi_free(ctx, s->psi);
  lvsi_free(ctx, s);
}

size_t lvs_dlseries_dim(const lvs_dlseries *s) { return s->n; }
int lvs_dlseries_order(const lvs_dlseries *s) { return s->order; }
size_t lvs_dlseries_band(const lvs_dlseries *s) { return s->band; }
double lvs_dlseries_gap(const lvs_dlseries *s) { return s->gap; }
const char *lvs_dlseries_solver(const lvs_dlseries *s) { return s->solver; }

int lvs_dlseries_energy(const lvs_dlseries *s, int k, double *e) {
  if (k < 0 || k > s->order)
    return lvsi_fail(s->ctx, LVS_ERANGE, "order %d out of range 0..%d", k, s->order);
  *e = s->E[k];
  return LVS_OK;
}

const double *lvs_dlseries_state(const lvs_dlseries *s, int k) {
  if (k < 0 || k >= s->order) return NULL;
  return s->psi + (size_t)k * s->n;
}

int lvs_dlseries_at(const lvs_dlseries *s, double lambda, int order, double *e) {
  if (order < 0 || order > s->order) order = s->order;
  double acc = 0.0, p = 1.0;
  for (int k = 0; k <= order; k++) {
    acc += p * s->E[k];
    p *= lambda;
  }
  *e = acc;
  return LVS_OK;
}

/* y = H x from the lower band (symmetric) */
static void band_apply(size_t n, size_t b, const double *ab, const double *x, double *y) {
  size_t ld = b + 1;
  for (size_t i = 0; i < n; i++) y[i] = ab[i * ld] * x[i];
  for (size_t j = 0; j < n; j++)
    for (size_t d = 1; d <= b && j + d < n; d++) {
      double v = ab[d + j * ld];
      y[j + d] += v * x[j];
      y[j] += v * x[j + d];
    }
}

/* Twisted factorization T - sigma = N D N^T of the symmetric tridiagonal
 * T = (d, e[i * es]) at the middle row t: rows [0, t) are eliminated
 * top-down and rows (t, m) bottom-up, two independent chains interleaved so
 * that their divisions overlap (Parlett & Dhillon, Linear Algebra Appl.
 * 309, 121 (2000)). piv gets the pivots (piv[t] the twist pivot), mult the
 * multipliers (top: mult[i] = e[i]/piv[i], i < t; bottom: mult[i] =
 * e[i]/piv[i+1], i >= t). No pivoting. Each chain step is one division and
 * one subtraction, p' = (d - sigma) - e^2/p; the multiplier e/p is a second
 * division off the chain. piv may be d (in place). Returns the number of
 * pivots that are not positive, NaN included (0 exactly when T - sigma is
 * positive definite: N D N^T is a congruence, Sylvester's law of inertia;
 * then the factorization is as stable as Cholesky's, both sides being
 * Cholesky-like and the twist pivot a Schur complement of a positive
 * definite matrix), and in *zero the number that are zero or not finite
 * (a shift exactly on an eigenvalue of a leading or trailing block). Any
 * m >= 1. */
static size_t twisted_factor(size_t m, const double *d, const double *e, size_t es, double sigma,
                             double *piv, double *mult, size_t *zero) {
  size_t t = m / 2, nb = m - 1 - t; /* t top rows, nb (<= t) bottom rows */
  /* the last pivot of each chain is carried in a register (through memory
   * the store-to-load forwarding would lengthen the chain) */
  double pt = 1.0, pb = 1.0;
  if (t > 0) piv[0] = pt = d[0] - sigma;
  if (nb > 0) piv[m - 1] = pb = d[m - 1] - sigma;
  size_t j = 1;
  for (; j < nb; j++) { /* row j from the top, row i = m-1-j from the bottom */
    size_t i = m - 1 - j;
    double et = e[(j - 1) * es], eb = e[i * es];
    mult[j - 1] = et / pt;
    mult[i] = eb / pb;
    pt = (d[j] - sigma) - (et * et) / pt;
    pb = (d[i] - sigma) - (eb * eb) / pb;
    piv[j] = pt;
    piv[i] = pb;
  }
  for (; j < t; j++) { /* at most one more top row */
    double et = e[(j - 1) * es];
    mult[j - 1] = et / pt;
    piv[j] = pt = (d[j] - sigma) - (et * et) / pt;
  }
  double g = d[t] - sigma;
  if (t > 0) {
    double et = e[(t - 1) * es];
    mult[t - 1] = et / pt;
    g -= mult[t - 1] * et;
  }
  if (nb > 0) {
    double eb = e[t * es];
    mult[t] = eb / pb;
    g -= mult[t] * eb;
  }
  piv[t] = g;
  size_t bad = 0, z = 0;
  for (size_t i = 0; i < m; i++) {
    double a = fabs(piv[i]);
    bad += !(piv[i] > 0);
    z += !(a > 0 && a <= DBL_MAX);
  }
  if (zero) *zero = z;
  return bad;
}

/* Solves N D N^T x = b in place (v holds b on entry, x on return) with the
 * factors of twisted_factor: elimination towards the twist row from both
 * ends, the twist row, substitution outward (two chains each, carried in
 * registers). */
static void twisted_subst(size_t m, const double *piv, const double *mult, double *v) {
  size_t t = m / 2, nb = m - 1 - t, j = 1;
  double xt = v[0], xb = v[m - 1];
  for (; j < nb; j++) {
    xt = v[j] - mult[j - 1] * xt;
    xb = v[m - 1 - j] - mult[m - 1 - j] * xb;
    v[j] = xt;
    v[m - 1 - j] = xb;
  }
  for (; j < t; j++) v[j] = xt = v[j] - mult[j - 1] * xt;
  double r = v[t];
  if (t > 0) r -= mult[t - 1] * xt;
  if (nb > 0) r -= mult[t] * xb;
  v[t] = xt = xb = r / piv[t];
  for (j = 1; j <= nb; j++) { /* rows t-j and t+j */
    xt = v[t - j] / piv[t - j] - mult[t - j] * xt;
    xb = v[t + j] / piv[t + j] - mult[t + j - 1] * xb;
    v[t - j] = xt;
    v[t + j] = xb;
  }
  if (t > nb) v[0] = v[0] / piv[0] - mult[0] * xt;
}

/* The factored shifted matrix M = H0 - E + sigma e_p e_p^T. */
typedef struct {
  size_t n, b;
  int kind; /* 0 diagonal, 1 twisted, 2 dgt, 3 dpb, 4 dgb */
  double *d, *e, *dl, *du, *du2, *ab;
  lapack_int *ipiv;
} shifted;

static void shifted_free(lvs_ctx *ctx, shifted *m) {
  lvsi_free(ctx, m->d);
  lvsi_free(ctx, m->e);
  lvsi_free(ctx, m->dl);
  lvsi_free(ctx, m->du);
  lvsi_free(ctx, m->du2);
  lvsi_free(ctx, m->ab);
  lvsi_free(ctx, m->ipiv);
}

static int shifted_factor(lvs_ctx *ctx, const double *hb, size_t n, size_t b, double E, size_t p,
                          double sigma, shifted *m, const char **solver) {
  memset(m, 0, sizeof *m);
  m->n = n;
  m->b = b;
  size_t ld = b + 1;
  lapack_int N = (lapack_int)n, info;
  if (b == 0) {
    m->kind = 0;
    if (!(m->d = lvsi_malloc(ctx, n * sizeof(double)))) goto nomem;
    for (size_t i = 0; i < n; i++) m->d[i] = hb[i] - E;
    m->d[p] += sigma;
    for (size_t i = 0; i < n; i++)
      if (m->d[i] == 0.0)
        return lvsi_fail(ctx, LVS_EINVAL, "level is degenerate with state %zu of the diagonal H0", i + 1);
    *solver = "diagonal";
    return LVS_OK;
  }
  if (b == 1) {
    m->d = lvsi_malloc(ctx, n * sizeof(double));
    m->e = lvsi_malloc(ctx, n * sizeof(double));
    if (!m->d || !m->e) goto nomem;
    for (size_t i = 0; i < n; i++) m->d[i] = hb[i * ld] - E;
    m->d[p] += sigma;
    /* positive definite (the lowest level): the twisted L D L^T, two
     * chains (half the latency of dpttrf's one) */
    if (twisted_factor(n, m->d, hb + 1, ld, 0.0, m->d, m->e, NULL) == 0) {
      m->kind = 1;
      *solver = "twisted";
      return LVS_OK;
    }
    /* not positive definite (not the lowest level): LU with pivoting */
    m->dl = lvsi_malloc(ctx, n * sizeof(double));
    m->du = lvsi_malloc(ctx, n * sizeof(double));
    m->du2 = lvsi_malloc(ctx, n * sizeof(double));
    m->ipiv = lvsi_malloc(ctx, n * sizeof(lapack_int));
    if (!m->dl || !m->du || !m->du2 || !m->ipiv) goto nomem;
    for (size_t i = 0; i < n; i++) m->d[i] = hb[i * ld] - E;
    m->d[p] += sigma;
    for (size_t i = 0; i + 1 < n; i++) m->dl[i] = m->du[i] = hb[1 + i * ld];
    info = LAPACKE_dgttrf(N, m->dl, m->d, m->du, m->du2, m->ipiv);
    if (info < 0) return lvsi_fail(ctx, LVS_EINVAL, "dgttrf: argument %d invalid", (int)-info);
    if (info > 0)
      return lvsi_fail(ctx, LVS_ELAPACK,
                       "dgttrf: shifted matrix is singular at %d (the level is degenerate, or the "
                       "given state is not an eigenvector)", (int)info);
    m->kind = 2;
    *solver = "dgttrf";
    return LVS_OK;
  }
  if (!(m->ab = lvsi_malloc(ctx, ld * n * sizeof(double)))) goto nomem;
  memcpy(m->ab, hb, ld * n * sizeof(double));
  for (size_t i = 0; i < n; i++) m->ab[i * ld] -= E;
  m->ab[p * ld] += sigma;
  info = LAPACKE_dpbtrf_work(LAPACK_COL_MAJOR, 'L', N, (lapack_int)b, m->ab, (lapack_int)ld);
  if (info == 0) {
    m->kind = 3;
    *solver = "dpbtrf";
    return LVS_OK;
  }
  lvsi_free(ctx, m->ab);
  size_t ldl = 3 * b + 1;
  m->ab = lvsi_calloc(ctx, ldl * n, sizeof(double));
  m->ipiv = lvsi_malloc(ctx, n * sizeof(lapack_int));
  if (!m->ab || !m->ipiv) goto nomem;
  /* A(i,j) at ab[(2b + i - j) + j ldl] (kl = ku = b) */
  for (size_t j = 0; j < n; j++)
    for (size_t d = 0; d <= b && j + d < n; d++) {
      double v = hb[d + j * ld];
      if (d == 0) {
        v -= E;
        if (j == p) v += sigma;
      }
      m->ab[(2 * b + d) + j * ldl] = v;           /* (j+d, j) */
      if (d) m->ab[(2 * b - d) + (j + d) * ldl] = v; /* (j, j+d) */
    }
  info = LAPACKE_dgbtrf_work(LAPACK_COL_MAJOR, N, N, (lapack_int)b, (lapack_int)b, m->ab,
                             (lapack_int)ldl, m->ipiv);
  if (info < 0) return lvsi_fail(ctx, LVS_EINVAL, "dgbtrf: argument %d invalid", (int)-info);
  if (info > 0)
    return lvsi_fail(ctx, LVS_ELAPACK,
                     "dgbtrf: shifted matrix is singular at %d (the level is degenerate, or the "
                     "given state is not an eigenvector)", (int)info);
  m->kind = 4;
  *solver = "dgbtrf";
  return LVS_OK;
nomem:
  return lvsi_fail(ctx, LVS_ENOMEM, "out of memory factoring the shifted H0");
}

static int shifted_solve(lvs_ctx *ctx, const shifted *m, double *x) {
  lapack_int N = (lapack_int)m->n, info = 0;
  switch (m->kind) {
    case 0:
      for (size_t i = 0; i < m->n; i++) x[i] /= m->d[i];
      return LVS_OK;
    case 1: twisted_subst(m->n, m->d, m->e, x); return LVS_OK;
    case 2:
      info = LAPACKE_dgttrs_work(LAPACK_COL_MAJOR, 'N', N, 1, m->dl, m->d, m->du, m->du2, m->ipiv, x, N);
      break;
    case 3:
      info = LAPACKE_dpbtrs_work(LAPACK_COL_MAJOR, 'L', N, (lapack_int)m->b, 1, m->ab,
                                 (lapack_int)(m->b + 1), x, N);
      break;
    case 4:
      info = LAPACKE_dgbtrs_work(LAPACK_COL_MAJOR, 'N', N, (lapack_int)m->b, (lapack_int)m->b, 1,
                                 m->ab, (lapack_int)(3 * m->b + 1), m->ipiv, x, N);
      break;
  }
  if (info) return lvsi_fail(ctx, LVS_ELAPACK, "banded solve failed (info %d)", (int)info);
  return LVS_OK;
}

static int cmp_double(const void *x, const void *y) {
  double a = *(const double *)x, b = *(const double *)y;
  return a < b ? -1 : a > b;
}


/* Sturm counts of the symmetric tridiagonal (d, e2 = squared off-diagonal)
 * at LANES shifts at once: cnt[k] = number of eigenvalues below x[k].
 * The count is the number of negative pivots of a factorization of
 * T - x (source: common practice, as in LAPACK's dlaebz), here of the
 * twisted one T - x = N D N^T at the middle row t: pivots top-down for
 * rows [0, t), bottom-up for rows (t, n), and the twist pivot at t; N D N^T
 * is a congruence, so by Sylvester's law of inertia its negative count is
 * the count below x (twisted factorizations: Parlett & Dhillon, Linear
 * Algebra Appl. 309, 121 (2000)). The two halves and the lanes are
 * independent chains, so the divisions pipeline. A pivot smaller than
 * pivmin is replaced by -pivmin, as in dlaebz. */
#define LANES 8
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
__attribute__((target_clones("avx2", "default")))
#endif
static void sturm(size_t n, const double *d, const double *e2, double pivmin, const double *x,
                  size_t *cnt) {
  /* counts as doubles: the loops vectorize */
  double qt[LANES], qb[LANES], c[LANES];
  size_t t = n / 2, nb = n - 1 - t; /* t top steps (rows 0..t-1), nb bottom steps */
  for (int k = 0; k < LANES; k++) {
    qt[k] = qb[k] = 1.0;
    c[k] = 0.0;
  }
  if (t > 0)
    for (int k = 0; k < LANES; k++) {
      double v = d[0] - x[k];
      qt[k] = fabs(v) < pivmin ? -pivmin : v;
      c[k] += qt[k] < 0 ? 1.0 : 0.0;
    }
  if (nb > 0)
    for (int k = 0; k < LANES; k++) {
      double v = d[n - 1] - x[k];
      qb[k] = fabs(v) < pivmin ? -pivmin : v;
      c[k] += qb[k] < 0 ? 1.0 : 0.0;
    }
  size_t j = 1;
  for (; j < nb; j++) { /* row j from the top and row n-1-j from the bottom */
    size_t i = n - 1 - j;
    double dt = d[j], et = e2[j - 1], db = d[i], eb = e2[i];
    for (int k = 0; k < LANES; k++) {
      double u = (dt - x[k]) - et / qt[k];
      double v = (db - x[k]) - eb / qb[k];
      u = fabs(u) < pivmin ? -pivmin : u;
      v = fabs(v) < pivmin ? -pivmin : v;
      qt[k] = u;
      qb[k] = v;
      c[k] += (u < 0 ? 1.0 : 0.0) + (v < 0 ? 1.0 : 0.0);
    }
  }
  for (; j < t; j++) { /* at most one more top row (n even) */
    double dt = d[j], et = e2[j - 1];
    for (int k = 0; k < LANES; k++) {
      double u = (dt - x[k]) - et / qt[k];
      u = fabs(u) < pivmin ? -pivmin : u;
      qt[k] = u;
      c[k] += u < 0 ? 1.0 : 0.0;
    }
  }
  for (int k = 0; k < LANES; k++) { /* the twist pivot */
    double g = d[t] - x[k];
    if (t > 0) g -= e2[t - 1] / qt[k];
    if (nb > 0) g -= e2[t] / qb[k];
    g = fabs(g) < pivmin ? -pivmin : g;
    c[k] += g < 0 ? 1.0 : 0.0;
  }
  for (int k = 0; k < LANES; k++) cnt[k] = (size_t)c[k];
}

/* State of tridiag_range's search: the matrix (d diagonal, e
 * off-diagonal, e2 its squares), the twisted factors' workspace (dl, dd),
 * the spectral scale and pivot floor, and the isolating interval [a, b]
 * with its Sturm counts ca <= level < cb (cb: at most). */
typedef struct {
  size_t n, level;
  double *d, *e, *e2, *dl, *dd;
  double scale, pivmin;
  double a, b;
  size_t ca, cb;
} tri_search;

/* Phase 1: copy the band out of hb and bound the spectrum (Gershgorin,
 * and for the lowest level a Rayleigh quotient from above). */
static void tri_bounds(tri_search *w, const double *hb) {
  size_t n = w->n;
  double *d = w->d, *e = w->e, *e2 = w->e2;
  double lo = INFINITY, hi = -INFINITY, emax = 0.0;
  for (size_t i = 0; i < n; i++) {
    d[i] = hb[2 * i];
    double el = i > 0 ? fabs(hb[2 * (i - 1) + 1]) : 0.0, er = i + 1 < n ? fabs(hb[2 * i + 1]) : 0.0;
    if (i + 1 < n) {
      e[i] = hb[2 * i + 1];
      e2[i] = e[i] * e[i];
    }
    lo = MIND(lo, d[i] - el - er);
    hi = MAXD(hi, d[i] + el + er);
    emax = MAXD(emax, er);
  }
  double scale = MAXD(fabs(lo), fabs(hi));
  if (scale == 0.0) scale = 1.0;
  w->scale = scale;
  w->pivmin = 2.2250738585072014e-308 * MAXD(1.0, emax * emax);
  w->a = lo - 1e-12 * scale;
  w->b = hi + 1e-12 * scale;
  if (w->level == 0 && n > 1) {
    /* the Rayleigh quotient of any vector bounds the lowest eigenvalue from
     * above (common practice): the constant and the alternating vector
     * give (sum d +- 2 sum e) / n, the smaller (sum d - 2 |sum e|) / n; for
     * a discretized kinetic energy this cuts the Gershgorin interval by
     * orders of magnitude (fewer Sturm passes) */
    double sd = 0.0, se = 0.0;
    for (size_t i = 0; i < n; i++) sd += d[i];
    for (size_t i = 0; i + 1 < n; i++) se += e[i];
    double rq = (sd - 2 * fabs(se)) / (double)n + 1e-12 * scale;
    if (rq < w->b && rq > w->a) w->b = rq;
  }
  w->ca = 0;
  w->cb = n;
}

/* Phase 2: multisection with Sturm counts until eigenvalue `level` is
 * alone in [a, b], then `extra` more passes (each brings the starting shift
 * 81 times closer for less than a Rayleigh-quotient step). LVS_EINVAL when
 * the interval shrinks to 1e-10 of the scale with the level not alone. */
static int tri_isolate(lvs_ctx *ctx, tri_search *w, int extra) {
  size_t level = w->level;
  double x[LANES];
  size_t cnt[LANES];
  while (!(w->ca == level && w->cb == level + 1) || extra > 0) {
    if (w->ca == level && w->cb == level + 1) extra--;
    for (int k = 0; k < LANES; k++) x[k] = w->a + (w->b - w->a) * (double)(k + 1) / (LANES + 1);
    sturm(w->n, w->d, w->e2, w->pivmin, x, cnt);

    double na = w->a, nb = w->b;
    size_t nca = w->ca, ncb = w->cb;
    for (int k = LANES - 1; k >= 0; k--)
      if (cnt[k] > level) {
        nb = x[k];
        ncb = cnt[k];
      }
    for (int k = 0; k < LANES; k++)
      if (cnt[k] <= level) {
        na = x[k];
        nca = cnt[k];
      }
    w->a = na;
    w->b = nb;
    w->ca = nca;
    w->cb = ncb;
    if (w->b - w->a < 1e-10 * w->scale && !(w->ca == level && w->cb == level + 1))
      return lvsi_fail(ctx, LVS_EINVAL,
                       "level %zu is degenerate (%zu eigenvalues within %.3g of %.12g); the "
                       "linear-solve series needs a non-degenerate level (use ls.perturb)",
                       level + 1, w->cb - w->ca, w->b - w->a, 0.5 * (w->a + w->b));
    if (w->b - w->a < 1e-15 * w->scale) break;
  }
  return LVS_OK;
}

/* Phase 3: when H0 splits (zero off-diagonals), the diagonal block
 * [*s0, *s1) whose Sturm counts at a and b differ holds the eigenvector. */
static void tri_block(const tri_search *w, size_t *s0, size_t *s1) {
  const double *d = w->d, *e2 = w->e2;
  size_t n = w->n, start = 0;
  for (size_t i = 0; i < n; i++) {
    if (i + 1 < n && e2[i] != 0.0) continue;
    /* block [start, i] */
    if (start > 0 || i + 1 < n) {
      double qa = 1.0, qb = 1.0;
      size_t na = 0, nb = 0;
      for (size_t j = start; j <= i; j++) {
        double ej = j > start ? e2[j - 1] : 0.0;
        qa = (d[j] - w->a) - (j > start ? ej / qa : 0.0);
        if (fabs(qa) < w->pivmin) qa = -w->pivmin;
        qb = (d[j] - w->b) - (j > start ? ej / qb : 0.0);
        if (fabs(qb) < w->pivmin) qb = -w->pivmin;
        na += qa < 0;
        nb += qb < 0;
      }
      if (nb > na) {
        *s0 = start;
        *s1 = i + 1;
      }
    }
    start = i + 1;
  }
}

/* Phase 4: Rayleigh-quotient iteration with twisted solves on rows
 * [s0, s1), from the middle of [a, b]; vec (n entries) is zeroed outside
 * the block. Returns 1 with *rho when it converged to a quotient inside
 * [a, b] (to a few rounding units of the scale), else 0. */
static int tri_rqi(tri_search *w, size_t s0, size_t s1, double *vec, double *rho_out) {
  double *dd = w->dd, *dl = w->dl;
  double a = w->a, bb = w->b, scale = w->scale;
  size_t m = s1 - s0;
  double *vs = vec + s0;
  const double *ds = w->d + s0, *es = w->e + s0;
  double sigma = 0.5 * (a + bb);
  memset(vec, 0, w->n * sizeof(double));
  for (size_t i = 0; i < m; i++) vs[i] = 1.0 + 1e-3 * (double)((s0 + i) % 7);
  double rho = sigma, rprev = INFINITY;
  const double eps = 2.220446049250313e-16, tiny = eps * scale, tol = 4 * eps * scale;
  int polish = 0, ok = 0;
  for (int it = 0; it < 10; it++) {
    /* no pivoting: inverse iteration tolerates the element growth
     * (source: common practice, cf. LAPACK dlar1v) */
    size_t zero = 0;
    twisted_factor(m, ds, es, 1, sigma, dd, dl, &zero);
    /* a zero pivot (or the overflow after one): the shift is exactly an
     * eigenvalue of a leading or trailing block; move it by the rounding
     * scale (harmless for inverse iteration) */
    for (int nudge = 1; zero && nudge <= 8; nudge++)
      twisted_factor(m, ds, es, 1, sigma + nudge * tiny, dd, dl, &zero);
    twisted_subst(m, dd, dl, vs);
    /* y = vs: rho = y^T T y / y^T y and the residual |T x - rho x| of
     * x = y / |y| (T y recomputed in the second pass, not stored), which
     * also normalizes vs; four partial sums per reduction */
    double yy[4] = {0, 0, 0, 0}, yty[4] = {0, 0, 0, 0}, rr[4] = {0, 0, 0, 0};
    for (size_t i = 0; i < m; i++) {
      double tv = ds[i] * vs[i];
      if (i > 0) tv += es[i - 1] * vs[i - 1];
      if (i + 1 < m) tv += es[i] * vs[i + 1];
      yy[i & 3] += vs[i] * vs[i];
      yty[i & 3] += vs[i] * tv;
    }
    double ny2 = (yy[0] + yy[1]) + (yy[2] + yy[3]);
    if (!(ny2 > 0) || !isfinite(ny2)) break; /* narrow more, retry */
    rho = ((yty[0] + yty[1]) + (yty[2] + yty[3])) / ny2;
    double inv = 1.0 / sqrt(ny2), prev = 0.0;
    for (size_t i = 0; i < m; i++) {
      double yi = vs[i];
      double tv = ds[i] * yi + (i > 0 ? es[i - 1] * prev : 0.0) + (i + 1 < m ? es[i] * vs[i + 1] : 0.0);
      double ri = tv - rho * yi;
      rr[i & 3] += ri * ri;
      vs[i] = yi * inv;
      prev = yi;
    }
    double r2 = ((rr[0] + rr[1]) + (rr[2] + rr[3])) * inv * inv;
    double r = sqrt(r2);
    int inside = rho > a - tol && rho < bb + tol; /* else another level: narrow more, retry */
    /* converged: at the rounding floor now, or one more step after the
     * residual stops falling */
    if (polish || r <= eps * scale) {
      ok = inside;
      break;
    }
    if (r <= 64 * eps * scale || (it >= 2 && r > 0.5 * rprev && r <= 1e-12 * scale)) polish = 1;
    rprev = r;
    /* outside the isolating interval, keep the shift (inverse iteration) */
    if (rho > a && rho < bb) sigma = rho;
  }
  *rho_out = rho;
  return ok;
}

/* Eigenpair number `level` (0-based) of a symmetric tridiagonal matrix (hb:
 * lower band storage, ld 2): multisection with Sturm counts until the
 * eigenvalue is alone in [a, b], then Rayleigh-quotient iteration with
 * twisted solves, accepted only when the quotient lands in [a, b] (to a few
 * rounding units of the spectral scale); a rejected iteration narrows the
 * interval by two more multisections and retries (at most 20 times). The
 * phases: tri_bounds, tri_isolate, tri_block (first round only; retries
 * iterate on all rows), tri_rqi.
 * Source: common practice (Parlett, The Symmetric Eigenvalue Problem,
 * 1980, ch. 4-5, mem). Fails with LVS_EINVAL when the level cannot be
 * separated from a neighbour within 1e-10 of the spectral scale. */
static int tridiag_range(lvs_ctx *ctx, const double *hb, size_t n, size_t level, double *E,
                         double *vec) {
  int st = LVS_OK;
  tri_search w = {.n = n, .level = level};
  w.d = lvsi_malloc(ctx, n * sizeof(double));
  w.e2 = lvsi_malloc(ctx, n * sizeof(double));
  w.e = lvsi_malloc(ctx, n * sizeof(double));
  w.dl = lvsi_malloc(ctx, n * sizeof(double));
  w.dd = lvsi_malloc(ctx, n * sizeof(double));
  if (!w.d || !w.e2 || !w.e || !w.dl || !w.dd) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory finding the unperturbed level");
    goto done;
  }
  tri_bounds(&w, hb);
  for (int round = 0;; round++) {
    if ((st = tri_isolate(ctx, &w, 2))) goto done;
    size_t s0 = 0, s1 = n;
    if (round == 0) tri_block(&w, &s0, &s1);
    double rho;
    if (tri_rqi(&w, s0, s1, vec, &rho)) {
      *E = rho;
      break;
    }
    if (round + 1 > 20) {
      st = lvsi_fail(ctx, LVS_ENOCONV, "level %zu: eigenvector iteration did not converge", level + 1);
      goto done;
    }
  }
done:
  lvsi_free(ctx, w.d);
  lvsi_free(ctx, w.e2);
  lvsi_free(ctx, w.e);
  lvsi_free(ctx, w.dl);
  lvsi_free(ctx, w.dd);
  return st;
}

/* number of eigenvalues below x of the tridiagonal block rows [s, t) */
static size_t count_below(const double *hb, size_t s, size_t t, double x) {
  size_t c = 0;
  double q = 1.0;
  for (size_t i = s; i < t; i++) {
    double e = i > s ? hb[2 * (i - 1) + 1] : 0.0;
    q = (hb[2 * i] - x) - (i > s ? e * e / q : 0.0);
    if (q == 0.0) q = -2.2250738585072014e-308;
    c += q < 0;
  }
  return c;
}

/* Gershgorin's lower bound of the spectrum of tridiagonal block rows [s, t) */
static double gershgorin_lo(const double *hb, size_t s, size_t t) {
  double lo = INFINITY;
  for (size_t i = s; i < t; i++) {
    double el = i > s ? fabs(hb[2 * (i - 1) + 1]) : 0.0, er = i + 1 < t ? fabs(hb[2 * i + 1]) : 0.0;
    lo = MIND(lo, hb[2 * i] - el - er);
  }
  return lo;
}

/* Eigenpair `level` of a tridiagonal H0. For the lowest level of an H0
 * that splits into blocks (symmetry sectors), each block is asked with one
 * Sturm count whether it has anything below the best value so far, so
 * only the blocks that can hold the ground level are solved. */
static int tridiag_pair(lvs_ctx *ctx, const double *hb, size_t n, size_t level, double *E,
                        double *vec) {
  size_t nsplit = 0;
  for (size_t i = 0; i + 1 < n; i++) nsplit += hb[2 * i + 1] == 0.0;
  if (level != 0 || nsplit == 0) return tridiag_range(ctx, hb, n, level, E, vec);
  double scale = 0.0;
  for (size_t i = 0; i < n; i++)
    scale = MAXD(scale, fabs(hb[2 * i]) + 2 * (i + 1 < n ? fabs(hb[2 * i + 1]) : 0.0));
  double tau = 1e-10 * (scale > 0 ? scale : 1.0), best = INFINITY;
  size_t bs = 0, bt = 0;
  memset(vec, 0, n * sizeof(double));
  for (size_t s = 0; s < n;) {
    size_t t = s;
    while (t + 1 < n && hb[2 * t + 1] != 0.0) t++;
    t++; /* block [s, t) */
    /* after the first block: one whose Gershgorin lower bound lies above
     * the best level so far needs no Sturm count */
    if (best == INFINITY ||
        (gershgorin_lo(hb, s, t) <= best + tau && count_below(hb, s, t, best + tau) > 0)) {
      double e;
      int st = tridiag_range(ctx, hb + 2 * s, t - s, 0, &e, vec + s);
      if (st) return st;
      if (fabs(e - best) <= tau)
        return lvsi_fail(ctx, LVS_EINVAL,
                         "level 1 is degenerate (two blocks have %.12g); the linear-solve series "
                         "needs a non-degenerate level (use ls.perturb)", e);
      if (e < best) {
        best = e;
        bs = s;
        bt = t;
      }
    }
    s = t;
  }
  for (size_t i = 0; i < n; i++)
    if (i < bs || i >= bt) vec[i] = 0.0;
  *E = best;
  return LVS_OK;
}

/* Eigenpair number `level` (0-based, ascending) of the band matrix; also
 * the distance to its neighbours. */
static int find_pair(lvs_ctx *ctx, const double *hb, size_t n, size_t b, size_t level, double *E,
                     double *vec, double *gap) {
  size_t ld = b + 1;
  size_t lo = level > 0 ? level - 1 : level, hi = level + 1 < n ? level + 1 : level;
  size_t m = hi - lo + 1;
  double w[3];
  int st = LVS_OK;
  lapack_int N = (lapack_int)n, found = 0, info;
  if (b == 0) {
    double *d = lvsi_malloc(ctx, n * sizeof(double));
    if (!d) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
    for (size_t i = 0; i < n; i++) d[i] = hb[i];
    qsort(d, n, sizeof(double), cmp_double);
    for (size_t k = lo; k <= hi; k++) w[k - lo] = d[k];
    /* the state: the (level - first)-th index holding that value */
    size_t first = level;
    while (first > 0 && d[first - 1] == d[level]) first--;
    size_t want = level - first, seen = 0;
    memset(vec, 0, n * sizeof(double));
    for (size_t i = 0; i < n; i++)
      if (hb[i] == d[level] && seen++ == want) {
        vec[i] = 1.0;
        break;
      }
    lvsi_free(ctx, d);
  } else if (b == 1) {
    double ev = 0.0;
    if ((st = tridiag_pair(ctx, hb, n, level, &ev, vec))) return st;
    lo = hi = level;
    w[0] = ev;
  } else {
    double *ab = lvsi_malloc(ctx, ld * n * sizeof(double));
    double *wf = lvsi_malloc(ctx, n * sizeof(double));
    lapack_int *ifail = lvsi_malloc(ctx, n * sizeof(lapack_int));
    double q = 0, z = 0;
    if (!ab || !wf || !ifail) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory finding the unperturbed level");
    } else {
      memcpy(ab, hb, ld * n * sizeof(double));
      info = LAPACKE_dsbevx(LAPACK_COL_MAJOR, 'N', 'I', 'L', N, (lapack_int)b, ab, (lapack_int)ld,
                            &q, 1, 0.0, 0.0, (lapack_int)lo + 1, (lapack_int)hi + 1,
                            2 * LAPACKE_dlamch('S'), &found, wf, &z, 1, ifail);
      if (info || found != (lapack_int)m)
        st = lvsi_fail(ctx, LVS_ELAPACK, "dsbevx failed (info %d)", (int)info);
      else
        memcpy(w, wf, m * sizeof(double));
    }
    lvsi_free(ctx, ab);
    lvsi_free(ctx, wf);
    lvsi_free(ctx, ifail);
    if (st) return st;
    /* inverse iteration with (H - w I), LU with pivoting */
    double ev = w[level - lo];
    double scale = 0.0;
    for (size_t i = 0; i < n; i++) scale = MAXD(scale, fabs(hb[i * ld]));
    double shift = ev + 1e-13 * (scale > 0 ? scale : 1.0);
    size_t ldl = 3 * b + 1;
    double *lu = lvsi_calloc(ctx, ldl * n, sizeof(double));
    lapack_int *ipiv = lvsi_malloc(ctx, n * sizeof(lapack_int));
    if (!lu || !ipiv) {
      lvsi_free(ctx, lu);
      lvsi_free(ctx, ipiv);
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in inverse iteration");
    }
    for (size_t j = 0; j < n; j++)
      for (size_t d = 0; d <= b && j + d < n; d++) {
        double v = hb[d + j * ld] - (d == 0 ? shift : 0.0);
        lu[(2 * b + d) + j * ldl] = v;
        if (d) lu[(2 * b - d) + (j + d) * ldl] = v;
      }
    info = LAPACKE_dgbtrf_work(LAPACK_COL_MAJOR, N, N, (lapack_int)b, (lapack_int)b, lu,
                               (lapack_int)ldl, ipiv);
    if (info > 0) lu[(2 * b) + (size_t)(info - 1) * ldl] = 1e-300; /* exact hit: nudge */
    for (size_t i = 0; i < n; i++) vec[i] = 1.0 + 1e-3 * (double)(i % 7);
    for (int it = 0; it < 4 && !st; it++) {
      double nv = sqrt(dot(n, vec, vec));
      for (size_t i = 0; i < n; i++) vec[i] /= nv;
      info = LAPACKE_dgbtrs_work(LAPACK_COL_MAJOR, 'N', N, (lapack_int)b, (lapack_int)b, 1, lu,
                                 (lapack_int)ldl, ipiv, vec, N);
      if (info) st = lvsi_fail(ctx, LVS_ELAPACK, "inverse iteration failed (info %d)", (int)info);
    }
    double nv = sqrt(dot(n, vec, vec));
    for (size_t i = 0; i < n; i++) vec[i] /= nv;
    lvsi_free(ctx, lu);
    lvsi_free(ctx, ipiv);
    if (st) return st;
  }
  *E = w[level - lo];
  double g = lo == hi ? NAN : INFINITY; /* tridiagonal: isolation checked by Sturm counts */
  if (level > lo) g = MIND(g, w[level - lo] - w[0]);
  if (hi > level) g = MIND(g, w[hi - lo] - w[level - lo]);
  *gap = g;
  /* fix the sign: largest component positive (deterministic) */
  size_t p = argmax_abs(n, vec);
  if (vec[p] < 0)
    for (size_t i = 0; i < n; i++) vec[i] = -vec[i];
  return LVS_OK;
}

/* The lower band of a plain symmetric H into LAPACK lower storage, hb[(i-j)
 * + j (b+1)] = H(i, j) for j <= i <= j + b, checking finiteness and
 * symmetry on the way in O(n b) (the generic check searches every
 * transposed entry). Each stored upper entry H(i, j), i < j, is compared
 * with the lower H(j, i) already in hb (column i comes before column j); a
 * nonzero lower entry without a stored upper partner (sparse storage) shows
 * up as fewer matched pairs than nonzero lower entries, and only then is the
 * upper band assembled to find the worst pair. Same messages as
 * lvsi_check_hermitian. */
static int band_load(lvs_ctx *ctx, const lvs_matrix *h, size_t b, double *hb) {
  size_t n = h->rows, ld = b + 1;
  double scale = 0.0, worst = 0.0;
  size_t wi = 0, wj = 0, lower_cnt = 0, matched_cnt = 0;
  memset(hb, 0, ld * n * sizeof(double));
  for (size_t j = 0; j < n; j++) {
    size_t k0 = h->sparse ? h->cp[j] : 0, k1 = h->sparse ? h->cp[j + 1] : n;
    for (size_t k = k0; k < k1; k++) {
      size_t i = h->sparse ? h->ri[k] : k;
      double v = h->a[h->sparse ? k : i + j * n];
      if (!isfinite(v)) return lvsi_fail(ctx, LVS_EINVAL, "H0 has a NaN or infinite entry");
      scale = MAXD(scale, fabs(v));
      if (i >= j) {
        if (i - j > b) continue; /* dense storage: zero outside the band */
        hb[(i - j) + j * ld] = v;
        lower_cnt += i > j && v != 0.0;
      } else if (j - i <= b) { /* H(i, j) above the diagonal, within the band */
        double low = hb[(j - i) + i * ld];
        matched_cnt += low != 0.0;
        lvsi_note_defect(fabs(v - low), i, j, &worst, &wi, &wj);
      }
    }
  }
  if (h->sparse && matched_cnt < lower_cnt) { /* a lower entry without a stored partner */
    double *ub = lvsi_calloc(ctx, ld * n, sizeof(double));
    if (!ub) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory checking H0");
    for (size_t j = 0; j < n; j++)
      for (size_t k = h->cp[j]; k < h->cp[j + 1] && h->ri[k] < j; k++)
        ub[(j - h->ri[k]) + h->ri[k] * ld] = h->a[k];
    for (size_t i = 0; i < n; i++)
      for (size_t d = 1; d <= b && i + d < n; d++) /* H(i, i+d) vs H(i+d, i) */
        lvsi_note_defect(fabs(ub[d + i * ld] - hb[d + i * ld]), i, i + d, &worst, &wi, &wj);
    lvsi_free(ctx, ub);
  }
  if (worst > LVS_DEFAULT_HERM_TOL * (scale > 0 ? scale : 1.0))
    return lvsi_fail(ctx, LVS_ENOTHERM,
                     "H0 is not Hermitian: |H(%zu,%zu) - conj(H(%zu,%zu))| = %.3g (largest entry %.3g)",
                     wi + 1, wj + 1, wj + 1, wi + 1, worst, scale);
  return LVS_OK;
}

int lvs_dlseries_new(const lvs_matrix *h0, const lvs_matrix *v, int order,
                     const lvs_dlseries_opts *opts, lvs_dlseries **out) {
  lvs_ctx *ctx = h0->ctx;
  *out = NULL;
  lvs_dlseries_opts def = {0, NULL, NAN};
  if (!opts) opts = &def;
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0))
    return lvsi_fail(ctx, LVS_EDIM, "H0 must be square, got %zux%zu", n, lvs_matrix_cols(h0));
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n)
    return lvsi_fail(ctx, LVS_EDIM, "V is %zux%zu but H0 is %zux%zu", lvs_matrix_rows(v),
                     lvs_matrix_cols(v), n, n);
  if (order < 1 || order > 1000)
    return lvsi_fail(ctx, LVS_ERANGE, "order must be from 1 to 1000, got %d", order);
  if (h0->cplx || v->cplx)
    return lvsi_fail(ctx, LVS_EINVAL, "H0 and V must be real (complex operators: use ls.perturb)");
  if (!opts->state && opts->level >= n)
    return lvsi_fail(ctx, LVS_ERANGE, "level %zu out of range 1..%zu", opts->level + 1, n);
  int st;
  lvs_matrix *hp = NULL, *vp = NULL;
  double *hb = NULL, *tmp = NULL;
  shifted M;
  memset(&M, 0, sizeof M);
  lvs_dlseries *s = NULL;
  if (h0->vis && (st = lvs_matrix_visible(h0, 0, &hp))) goto done;
  if (v->vis && (st = lvs_matrix_visible(v, 0, &vp))) goto done;
  const lvs_matrix *H = hp ? hp : h0, *Vm = vp ? vp : v;
  if ((st = lvsi_check_hermitian(Vm, LVS_DEFAULT_HERM_TOL, "V"))) goto done;
  size_t b = (size_t)lvsi_mat_bandwidth(H);
  /* the LU fallback needs 3b+1 rows of band storage; keep under the cap */
  if ((st = lvsi_dense_ok(ctx, 3 * b + 1, n, sizeof(double), "linear-solve series (band storage)")))
    goto done;
  if ((st = lvsi_dense_ok(ctx, (size_t)order + 1, n, sizeof(double), "linear-solve series (states)")))
    goto done;
  s = lvsi_calloc(ctx, 1, sizeof *s);
  if (!s) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
    goto done;
  }
  s->ctx = ctx;
  s->n = n;
  s->order = order;
  s->band = b;
  s->gap = NAN;
  s->E = lvsi_calloc(ctx, (size_t)order + 1, sizeof(double));
  s->psi = lvsi_calloc(ctx, (size_t)order * n, sizeof(double));
  hb = lvsi_malloc(ctx, (b + 1) * n * sizeof(double));
  tmp = lvsi_malloc(ctx, n * sizeof(double));
  if (!s->E || !s->psi || !hb || !tmp) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in the linear-solve series");
    goto done;
  }
  if ((st = band_load(ctx, H, b, hb))) goto done;
  double *nvec = s->psi, E0 = 0.0;
  double scale = 0.0;
  for (size_t i = 0; i < n; i++) scale = MAXD(scale, fabs(hb[i * (b + 1)]));
  if (b) scale = MAXD(scale, 2 * fabs(hb[1]));
  if (scale == 0.0) scale = 1.0;
  if (!opts->state) {
    if ((st = find_pair(ctx, hb, n, b, opts->level, &E0, nvec, &s->gap))) goto done;
    if (s->gap < 1e-10 * scale) {
      st = lvsi_fail(ctx, LVS_EINVAL,
                     "level %zu is degenerate (gap %.3g to a neighbour); the linear-solve series "
                     "needs a non-degenerate level (use ls.perturb)", opts->level + 1, s->gap);
      goto done;
    }
  } else {
    memcpy(nvec, opts->state, n * sizeof(double));
    double nn = sqrt(dot(n, nvec, nvec));
    if (!(nn > 0) || !isfinite(nn)) {
      st = lvsi_fail(ctx, LVS_EINVAL, "state is zero or not finite");
      goto done;
    }
    for (size_t i = 0; i < n; i++) nvec[i] /= nn;
    band_apply(n, b, hb, nvec, tmp);
    E0 = isnan(opts->energy) ? dot(n, nvec, tmp) : opts->energy;
    double r = 0.0;
    for (size_t i = 0; i < n; i++) r += (tmp[i] - E0 * nvec[i]) * (tmp[i] - E0 * nvec[i]);
    r = sqrt(r);
    if (r > 1e-8 * scale) {
      st = lvsi_fail(ctx, LVS_EINVAL,
                     "state is not an eigenvector of H0 with energy %.10g: |H0 n - E n| = %.3g "
                     "(needs below %.3g)", E0, r, 1e-8 * scale);
      goto done;
    }
  }
  s->E[0] = E0;
  size_t p = argmax_abs(n, nvec);
  double sigma = max_diag_dist(n, hb, b + 1, E0);
  if (sigma == 0.0) sigma = 1.0;
  if ((st = shifted_factor(ctx, hb, n, b, E0, p, sigma, &M, &s->solver))) goto done;
  double *vpsi = tmp;
  for (int k = 1; k <= order; k++) {
    const double *prev = s->psi + (size_t)(k - 1) * n;
    if ((st = lvs_matrix_apply(Vm, 0, prev, vpsi))) goto done;
    s->E[k] = dot(n, nvec, vpsi);
    if (k == order) break; /* psi(order) is not needed for E(order) */
    double *y = s->psi + (size_t)k * n;
    /* rhs = V psi(k-1) - sum_{j=1..k} E(j) psi(k-j); y = -Q rhs */
    for (size_t i = 0; i < n; i++) y[i] = -vpsi[i];
    for (int j = 1; j <= k; j++) {
      const double *pj = s->psi + (size_t)(k - j) * n;
      double ej = s->E[j];
      for (size_t i = 0; i < n; i++) y[i] += ej * pj[i];
    }
    double c = dot(n, nvec, y);
    for (size_t i = 0; i < n; i++) y[i] -= c * nvec[i];
    if ((st = shifted_solve(ctx, &M, y))) goto done;
    c = dot(n, nvec, y);
    for (size_t i = 0; i < n; i++) y[i] -= c * nvec[i];
  }
done:
  shifted_free(ctx, &M);
  lvsi_free(ctx, hb);
  lvsi_free(ctx, tmp);
  lvs_matrix_free(hp);
  lvs_matrix_free(vp);
  if (st) {
    lvs_dlseries_free(s);
    return st;
  }
  *out = s;
  return LVS_OK;
}
