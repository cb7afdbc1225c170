/* resolvent.c -- the reduced resolvent of a large sparse H0 for a group of
 * its levels: x = R r with R = Q (E - H0)^{-1} Q, Q = 1 - P P^H, P the
 * group's n x d orthonormal eigenvectors (from the Krylov path) and E their
 * (common) energy. Every order of the series of a sparse H0 is one such
 * solve per group member (series.c).
 *
 * Two ways, chosen per group:
 *   - the bordered system B = [[E - H0, P], [P^H, 0]] (METHODS.md 1(b)):
 *     B [x; y] = [r; 0] gives P^H x = 0 and, because (E - H0) P = 0,
 *     y = P^H r and (E - H0) x = Q r, so x = R r. B is nonsingular when the
 *     group holds every level at E. Factored once by UMFPACK (sparse_lu.c)
 *     and reused for every order and member -- when its factors stay small:
 *     the symbolic analysis' size estimate must be at most
 *     LVSI_RESOLVENT_FILL times the bytes of B itself. Oscillators, boxes,
 *     grids and several modes stay far below; spin clusters (whose sparsity
 *     graph is an expander) fill in almost densely (a 12870-state sector of
 *     a 16-site chain: ~2e7 entries), and for them
 *   - MINRES (C. C. Paige, M. A. Saunders, SIAM J. Numer. Anal. 12, 617
 *     (1975)) on the projected operator Q (H0 - E) Q, Hermitian and
 *     nonsingular on range(Q); b = Q r lies in range(Q), so do the Krylov
 *     vectors (the projection is applied at every product to keep them
 *     there in floating point). For the lowest level Q (H0 - E) Q is
 *     positive on range(Q) and the iteration count grows like the square
 *     root of (E_max - E)/(E_1 - E). Neither ARPACK nor SuiteSparse has a
 *     Krylov linear solver, so this one is ours. The stopping test is the
 *     recurrence's residual estimate phibar <= tol |b|; the true residual is
 *     computed at the end and must agree, or the solve is LVS_ENOCONV.
 * Products with H0 use the Krylov path's product (krylov.c, lvsi_symop).
 */
#include <complex.h>
#include <math.h>
#include <string.h>
#include "internal.h"

#define LVSI_RESOLVENT_FILL 12.0
#define LVSI_RESOLVENT_TOL 1e-13

typedef double complex dc;

struct lvsi_resolvent {
  lvs_ctx *ctx;
  size_t n, d;
  double e;
  int cplx;          /* H0 complex */
  const dc *P;       /* BORROWED n x d */
  lvsi_splu *lu;     /* bordered factorization, or NULL: MINRES */
  lvsi_symop *op;    /* products with H0 (MINRES) */
  double hnorm;      /* a bound on |H0 - E| (Gershgorin) */
  dc *work;          /* MINRES vectors (7 n) and its right-hand side (n) */
  double *rx, *ry;   /* real scratch (2 n each) for the bordered solve */
  size_t iters;      /* total MINRES iterations so far */
};

void lvsi_resolvent_free(lvsi_resolvent *r) {
  if (!r) return;
  lvs_ctx *ctx = r->ctx;
  lvsi_splu_free(r->lu);
  lvsi_symop_free(r->op);
  lvsi_free(ctx, r->work);
  lvsi_free(ctx, r->rx);
  lvsi_free(ctx, r->ry);
  lvsi_free(ctx, r);
}

/* the bordered matrix in CSC: (n + d) square; values complex when cplx */
static int bordered_csc(const lvs_matrix *h, const dc *P, size_t d, double e, int cplx, size_t **pcp,
                        size_t **pri, double **pv) {
  lvs_ctx *ctx = h->ctx;
  size_t n = h->cols, w = cplx ? 2 : 1, nb = n + d;
  size_t cap = h->nnz + n + 2 * n * d;
  size_t *cp = lvsi_malloc(ctx, (nb + 1) * sizeof(size_t)), *ri = lvsi_malloc(ctx, cap * sizeof(size_t));
  double *v = lvsi_malloc(ctx, cap * w * sizeof(double));
  if (!cp || !ri || !v) {
    lvsi_free(ctx, cp), lvsi_free(ctx, ri), lvsi_free(ctx, v);
    return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory for the bordered system");
  }
  size_t q = 0, hw = h->cplx ? 2 : 1;
#define PUT(row, re, im)      \
  do {                        \
    ri[q] = (row);            \
    v[w * q] = (re);          \
    if (w == 2) v[w * q + 1] = (im); \
    q++;                      \
  } while (0)
  for (size_t j = 0; j < n; j++) {
    cp[j] = q;
    int diag = 0;
    for (size_t k = h->cp[j]; k <= h->cp[j + 1]; k++) {
      int end = k == h->cp[j + 1];
      size_t i = end ? SIZE_MAX : h->ri[k];
      if (!diag && i > j) {
        PUT(j, e, 0.0);
        diag = 1;
      }
      if (end) break;
      double re = -h->a[hw * k], im = hw == 2 ? -h->a[hw * k + 1] : 0.0;
      if (i == j) re += e, diag = 1;
      PUT(i, re, im);
    }
    for (size_t b = 0; b < d; b++) { /* row n + b: (P^H)_{b j} = conj(P_{j b}) */
      dc p = conj(P[j + b * n]);
      if (p != 0) PUT(n + b, creal(p), cimag(p));
    }
  }
  for (size_t b = 0; b < d; b++) { /* column n + b: P_{:, b} */
    cp[n + b] = q;
    for (size_t i = 0; i < n; i++) {
      dc p = P[i + b * n];
      if (p != 0) PUT(i, creal(p), cimag(p));
    }
  }
#undef PUT
  cp[nb] = q;
  *pcp = cp, *pri = ri, *pv = v;
  return LVS_OK;
}

int lvsi_resolvent_new(const lvs_matrix *h, const dc *P, size_t d, double e, int allow_lu, lvsi_resolvent **out) {
  lvs_ctx *ctx = h->ctx;
  *out = NULL;
  lvsi_resolvent *r = lvsi_calloc(ctx, 1, sizeof *r);
  if (!r) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  r->ctx = ctx;
  r->n = h->cols;
  r->d = d;
  r->e = e;
  r->P = P;
  size_t n = r->n;
  /* the bordered system must be complex when H0 or P is */
  int cplx = h->cplx;
  for (size_t k = 0; k < n * d && !cplx; k++) cplx = cimag(P[k]) != 0.0;
  r->cplx = cplx;
  int st = LVS_OK;
  /* the LU is tried (its symbolic analysis alone costs an ordering of B)
   * only where it can stay small: up to 20000 states, or a band narrow
   * enough that a banded LU would fit the budget */
  if (allow_lu && n > 20000) {
    double band = (double)lvsi_mat_bandwidth(h);
    allow_lu = (2 * band + 1) * (double)n <= LVSI_RESOLVENT_FILL * (double)(h->nnz + 2 * n * d);
  }
  if (allow_lu) {
    size_t *cp = NULL, *ri = NULL;
    double *v = NULL;
    if ((st = bordered_csc(h, P, d, e, cplx, &cp, &ri, &v))) goto fail;
    /* factors up to FILL times B's own bytes, and at least 32 MB: a small
     * model solves faster by LU whatever its fill */
    double budget = fmax(LVSI_RESOLVENT_FILL * (double)cp[n + d] * (cplx ? 24.0 : 16.0), 32e6);
    st = lvsi_splu_new_capped(ctx, n + d, cplx, cp, ri, v, budget, "perturb (bordered system)", &r->lu);
    lvsi_free(ctx, cp), lvsi_free(ctx, ri), lvsi_free(ctx, v);
    if (st == LVSI_SPLU_TOO_FULL) {
      lvs_clear_error(ctx);
      st = LVS_OK; /* iterative below */
    } else if (st) {
      goto fail;
    }
  }
  if (r->lu) {
    r->rx = lvsi_malloc(ctx, 2 * (n + d) * sizeof(double));
    r->ry = lvsi_malloc(ctx, 2 * (n + d) * sizeof(double));
    if (!r->rx || !r->ry) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
      goto fail;
    }
  } else {
    if ((st = lvsi_symop_new(h, &r->op))) goto fail;
    double lo, hi;
    lvsi_gershgorin(h, &lo, &hi);
    r->hnorm = fmax(fabs(hi - e), fabs(lo - e));
    if (!(r->work = lvsi_malloc(ctx, 8 * n * sizeof(dc)))) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory for the iterative solve");
      goto fail;
    }
  }
  *out = r;
  return LVS_OK;
fail:
  lvsi_resolvent_free(r);
  return st;
}

const char *lvsi_resolvent_method(const lvsi_resolvent *r) { return r->lu ? "bordered LU" : "MINRES"; }
size_t lvsi_resolvent_iterations(const lvsi_resolvent *r) { return r->iters; }

/* x -= P (P^H x) */
static void project(const lvsi_resolvent *r, dc *x) {
  size_t n = r->n;
  for (size_t b = 0; b < r->d; b++) {
    const dc *p = r->P + b * n;
    dc c = 0;
    for (size_t i = 0; i < n; i++) c += conj(p[i]) * x[i];
    if (c != 0)
      for (size_t i = 0; i < n; i++) x[i] -= c * p[i];
  }
}

/* y = Q (H0 - E) Q x; x is in range(Q) already, and is not changed */
static void qop(const lvsi_resolvent *r, const dc *x, dc *y) {
  lvsi_symop_apply_complex(r->op, (const double *)x, (double *)y);
  size_t n = r->n;
  for (size_t i = 0; i < n; i++) y[i] -= r->e * x[i];
  project(r, y);
}

static double vnorm(const dc *x, size_t n) {
  double s = 0;
  for (size_t i = 0; i < n; i++) s += creal(x[i]) * creal(x[i]) + cimag(x[i]) * cimag(x[i]);
  return sqrt(s);
}

/* MINRES for (H0 - E) x = b on range(Q) (b projected by the caller);
 * the recurrence of Paige & Saunders without a preconditioner */
static int minres(lvsi_resolvent *r, const dc *b, dc *x) {
  size_t n = r->n;
  dc *r1 = r->work, *r2 = r1 + n, *y = r2 + n, *v = y + n, *w = v + n, *w1 = w + n, *w2 = w1 + n;
  memset(x, 0, n * sizeof(dc));
  double beta1 = vnorm(b, n);
  if (beta1 == 0) return LVS_OK;
  memcpy(r1, b, n * sizeof(dc));
  memcpy(r2, b, n * sizeof(dc));
  memcpy(y, b, n * sizeof(dc));
  memset(w, 0, n * sizeof(dc));
  memset(w2, 0, n * sizeof(dc));
  double oldb = 0, beta = beta1, dbar = 0, epsln = 0, phibar = beta1, cs = -1, sn = 0;
  double tol = LVSI_RESOLVENT_TOL;
  size_t maxit = 20 * (size_t)sqrt((double)n) + 2000, it;
  for (it = 1; it <= maxit; it++) {
    if ((it & 63) == 0) {
      int st = lvsi_fence(r->ctx, "perturb (an iterative solve)");
      if (st) return st;
    }
    double s = 1.0 / beta;
    for (size_t i = 0; i < n; i++) v[i] = s * y[i];
    qop(r, v, y);
    if (it >= 2)
      for (size_t i = 0; i < n; i++) y[i] -= (beta / oldb) * r1[i];
    double alfa = 0;
    for (size_t i = 0; i < n; i++) alfa += creal(conj(v[i]) * y[i]);
    for (size_t i = 0; i < n; i++) y[i] -= (alfa / beta) * r2[i];
    dc *t = r1;
    r1 = r2, r2 = t;
    memcpy(r2, y, n * sizeof(dc));
    oldb = beta;
    beta = vnorm(y, n);
    double oldeps = epsln, delta = cs * dbar + sn * alfa, gbar = sn * dbar - cs * alfa;
    epsln = sn * beta;
    dbar = -cs * beta;
    double gamma = fmax(hypot(gbar, beta), 1e-300);
    cs = gbar / gamma;
    sn = beta / gamma;
    double phi = cs * phibar;
    phibar = sn * phibar;
    t = w1, w1 = w2, w2 = w, w = t; /* w1 <- w2, w2 <- w, w <- (v - oldeps w1 - delta w2)/gamma */
    for (size_t i = 0; i < n; i++) {
      w[i] = (v[i] - oldeps * w1[i] - delta * w2[i]) / gamma;
      x[i] += phi * w[i];
    }
    if (phibar <= tol * beta1 || beta == 0) break;
  }
  r->iters += it > maxit ? maxit : it;
  /* the true residual (reusing y): b - (H0 - E) x on range(Q) */
  qop(r, x, y);
  for (size_t i = 0; i < n; i++) y[i] = b[i] - y[i];
  double res = vnorm(y, n), xn = vnorm(x, n);
  double accept = fmax(1e3 * tol * beta1, 64 * 2.2e-16 * r->hnorm * xn);
  if (!(res <= accept))
    return lvsi_fail(r->ctx, LVS_ENOCONV,
                     "perturb: the iterative solve of (E - H0) x = r (MINRES) did not converge: relative residual %.3g"
                     " after %zu iterations (tol %.3g); the level may be nearly degenerate with one outside its group",
                     res / beta1, it > maxit ? maxit : it, tol);
  return LVS_OK;
}

/* x = R rhs for a vector rhs of n complex values; x and rhs may not alias */
int lvsi_resolvent_solve(lvsi_resolvent *r, const dc *rhs, dc *x) {
  size_t n = r->n, d = r->d;
  if (r->lu) {
    /* B [x; y] = [rhs; 0]; a real factorization solves the real and
     * imaginary parts one after the other */
    int st;
    if (r->cplx) {
      memcpy(r->rx, rhs, n * sizeof(dc));
      memset(r->rx + 2 * n, 0, 2 * d * sizeof(double));
      if ((st = lvsi_splu_solve(r->lu, r->rx, r->ry))) return st;
      memcpy(x, r->ry, n * sizeof(dc));
      return LVS_OK;
    }
    int has_im = 0;
    for (size_t i = 0; i < n; i++) {
      r->rx[i] = creal(rhs[i]);
      has_im |= cimag(rhs[i]) != 0.0;
    }
    memset(r->rx + n, 0, d * sizeof(double));
    if ((st = lvsi_splu_solve(r->lu, r->rx, r->ry))) return st;
    for (size_t i = 0; i < n; i++) x[i] = r->ry[i];
    if (has_im) {
      for (size_t i = 0; i < n; i++) r->rx[i] = cimag(rhs[i]);
      memset(r->rx + n, 0, d * sizeof(double));
      if ((st = lvsi_splu_solve(r->lu, r->rx, r->ry))) return st;
      for (size_t i = 0; i < n; i++) x[i] += I * r->ry[i];
    }
    return LVS_OK;
  }
  /* (E - H0) x = Q rhs  <=>  (H0 - E) x = -Q rhs */
  dc *nb = r->work + 7 * n; /* past minres's own seven vectors */
  for (size_t i = 0; i < n; i++) nb[i] = -rhs[i];
  project(r, nb);
  return minres(r, nb, x);
}
