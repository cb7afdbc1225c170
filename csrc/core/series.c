/* series.c -- Rayleigh-Schroedinger perturbation series to any order, with
 * degenerate groups lifted in C.
 *
 * Method (see METHODS.md sections 1-2):
 *   - H0 is brought to its eigenbasis (left alone, and V left sparse, when it
 *     is already diagonal; the basis is then only permuted to ascending E).
 *   - Levels are grouped by a relative tolerance on the sorted E0.
 *   - For each group P the Bloch wave operator is built order by order
 *     (Bloch, Nucl. Phys. 6, 329 (1958)):
 *       (E_P - E_m) Omega(k)_ma = (V Omega(k-1))_ma - sum_{i=1..k-1} (Omega(i) W(k-i))_ma,
 *       W(k) = P V Omega(k-1).
 *     For a single level this is the RS recursion in intermediate
 *     normalization: E(k) = W(k), psi(k) = Omega(k). Each order costs one
 *     matvec with V plus O(k*dim).
 *   - For a degenerate group the eigenvalue series of the d x d matrix
 *     series M(lambda) = W(1) + lambda W(2) + ... is found recursively: M(0)
 *     is diagonalized, its eigenvalues grouped again, and each subgroup gets
 *     its own (small, dense) Bloch reduction with M(1), M(2), ... as a
 *     polynomial perturbation. A member's split order is the order at which
 *     its subgroup became a single level.
 */
#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <string.h>
#include "internal.h"

struct lvs_series {
  lvs_ctx *ctx;
  size_t n;       /* dimension */
  int K;          /* order */
  double *e0;     /* sorted unperturbed energies, n */
  double *e;      /* corrections, n x (K+1): e[lev*(K+1)+k] */
  int *done;      /* level computed */
  int *split;     /* order that split the level from its group (0: alone, -1: never) */
  size_t *group;  /* group index of the level */
  double *mind;   /* smallest |E_a - E_m| to levels outside the group */
  double complex **psi; /* per level: (K+1) x n states in the original basis, or NULL */
  int *nstates;   /* number of orders of state available (K+1, or 1) */
  double vnorm;   /* max column 1-norm of V */
  int normalized;
};

/* ---- V application in the sorted eigenbasis -------------------------- */
typedef struct {
  lvs_matrix *vb;  /* plain (sparse or dense) V in the working basis order perm */
  size_t *perm;    /* working index i -> row/col of vb */
  size_t n;
  double complex *xo, *yo;
} vapply;

static int vapply_do(vapply *a, const double complex *x, double complex *y) {
  for (size_t i = 0; i < a->n; i++) a->xo[a->perm[i]] = x[i];
  int st = lvs_matrix_apply(a->vb, 1, (const double *)a->xo, (double *)a->yo);
  if (st) return st;
  for (size_t i = 0; i < a->n; i++) y[i] = a->yo[a->perm[i]];
  return LVS_OK;
}

/* Bloch reduction of the full problem onto P (d indices in sorted basis).
 * om: (K+1) blocks of n x d; w: (K+1) blocks of d x d (w[0] unused). */
static int bloch_big(lvs_ctx *ctx, vapply *va, const double *E, double ep, const size_t *P, size_t d,
                     int K, double complex *om, double complex *w, double *mind) {
  size_t n = va->n;
  unsigned char *inP = lvsi_calloc(ctx, n, 1);
  double complex *y = lvsi_malloc(ctx, n * sizeof *y);
  if (!inP || !y) {
    lvsi_free(ctx, inP);
    lvsi_free(ctx, y);
    return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  }
  for (size_t b = 0; b < d; b++) inP[P[b]] = 1;
  double md = INFINITY;
  for (size_t m = 0; m < n; m++)
    if (!inP[m] && fabs(ep - E[m]) < md) md = fabs(ep - E[m]);
  *mind = md;
  memset(om, 0, (size_t)(K + 1) * n * d * sizeof *om);
  memset(w, 0, (size_t)(K + 1) * d * d * sizeof *w);
  for (size_t a = 0; a < d; a++) om[a * n + P[a]] = 1.0;
  int st = LVS_OK;
  for (int k = 1; k <= K && !st; k++) {
    double complex *omk = om + (size_t)k * n * d, *wk = w + (size_t)k * d * d;
    for (size_t a = 0; a < d && !st; a++) {
      st = vapply_do(va, om + ((size_t)(k - 1) * d + a) * n, y);
      if (st) break;
      for (size_t b = 0; b < d; b++) wk[a * d + b] = y[P[b]];
      for (size_t m = 0; m < n; m++) {
        if (inP[m]) continue;
        double complex r = y[m];
        for (int i = 1; i < k; i++) {
          const double complex *omi = om + (size_t)i * n * d, *wki = w + (size_t)(k - i) * d * d;
          for (size_t b = 0; b < d; b++) r -= omi[b * n + m] * wki[a * d + b];
        }
        omk[a * n + m] = r / (ep - E[m]);
      }
    }
  }
  lvsi_free(ctx, inP);
  lvsi_free(ctx, y);
  return st;
}

/* ---- eigenvalue series of a small matrix series ----------------------- */
/* M: Kp+1 blocks d x d (column-major). mu: d x (Kp+1) (mu[i*(Kp+1)+k]),
 * z: d x d zeroth-order vectors (columns), split: per member. ord0 is the
 * energy order that M[0] stands for. */
static int eigseries(lvs_ctx *ctx, size_t d, int Kp, const double complex *M, double tol, int ord0,
                     double *mu, double complex *z, int *split) {
  size_t dd = d * d;
  if (d == 1) {
    for (int k = 0; k <= Kp; k++) mu[k] = creal(M[(size_t)k]);
    z[0] = 1.0;
    split[0] = ord0 - 1 > 0 ? ord0 - 1 : 0; /* caller decides; placeholder */
    return LVS_OK;
  }
  int st = LVS_OK;
  double complex *c = lvsi_malloc(ctx, dd * sizeof *c);
  double *m = lvsi_malloc(ctx, d * sizeof *m);
  double complex *R = lvsi_malloc(ctx, (size_t)(Kp + 1) * dd * sizeof *R);
  double complex *t = lvsi_malloc(ctx, dd * sizeof *t);
  if (!c || !m || !R || !t) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto done;
  }
  /* Hermitian part of M[0] (exactly Hermitian at the first two levels) */
  for (size_t j = 0; j < d; j++)
    for (size_t i = 0; i < d; i++) c[j * d + i] = 0.5 * (M[j * d + i] + conj(M[i * d + j]));
  if (LAPACKE_zheev(LAPACK_COL_MAJOR, 'V', 'L', (lapack_int)d, (lapack_complex_double *)c, (lapack_int)d, m)) {
    st = lvsi_fail(ctx, LVS_ELAPACK, "perturb: zheev failed on a degenerate group");
    goto done;
  }
  /* R[k] = C^H M[k] C */
  for (int k = 0; k <= Kp; k++) {
    const double complex *Mk = M + (size_t)k * dd;
    double complex *Rk = R + (size_t)k * dd;
    for (size_t j = 0; j < d; j++)
      for (size_t i = 0; i < d; i++) {
        double complex s = 0;
        for (size_t l = 0; l < d; l++) s += Mk[l * d + i] * c[j * d + l];
        t[j * d + i] = s;
      }
    for (size_t j = 0; j < d; j++)
      for (size_t i = 0; i < d; i++) {
        double complex s = 0;
        for (size_t l = 0; l < d; l++) s += conj(c[i * d + l]) * t[j * d + l];
        Rk[j * d + i] = s;
      }
  }
  double scale = 0;
  for (size_t i = 0; i < d; i++) scale = fmax(scale, fabs(m[i]));
  scale = fmax(scale, m[d - 1] - m[0]);
  /* also relative to the size of the whole series, so tiny rounding
   * eigenvalues of an all-zero block count as equal */
  double ms = 0;
  for (size_t q = 0; q < (size_t)(Kp + 1) * dd; q++) ms = fmax(ms, cabs(R[q]));
  double atol = tol * fmax(scale, ms) + 1e-14 * ms;
  size_t g0 = 0;
  while (g0 < d && !st) {
    size_t g1 = g0 + 1;
    while (g1 < d && m[g1] - m[g1 - 1] <= atol) g1++;
    size_t gd = g1 - g0;
    double mean = 0;
    for (size_t i = g0; i < g1; i++) mean += m[i] / (double)gd;
    if (Kp == 0) {
      for (size_t i = g0; i < g1; i++) {
        mu[i] = gd == 1 ? m[i] : mean;
        split[i] = gd == 1 ? ord0 : -1;
        for (size_t l = 0; l < d; l++) z[i * d + l] = c[i * d + l];
      }
      g0 = g1;
      continue;
    }
    /* small Bloch: H0 = diag(m) with the group at 'mean', V_j = R[j] */
    double complex *om = lvsi_calloc(ctx, (size_t)(Kp + 1) * d * gd, sizeof *om);
    double complex *w = lvsi_calloc(ctx, (size_t)(Kp + 1) * gd * gd, sizeof *w);
    double *sub = lvsi_malloc(ctx, gd * (size_t)Kp * sizeof *sub);
    double complex *zs = lvsi_malloc(ctx, gd * gd * sizeof *zs);
    int *ss = lvsi_malloc(ctx, gd * sizeof *ss);
    if (!om || !w || !sub || !zs || !ss) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    } else {
      for (size_t a = 0; a < gd; a++) om[a * d + g0 + a] = 1.0;
      for (int k = 1; k <= Kp; k++) {
        double complex *omk = om + (size_t)k * d * gd, *wk = w + (size_t)k * gd * gd;
        for (size_t a = 0; a < gd; a++) {
          for (size_t r = 0; r < d; r++) {
            double complex y = 0;
            for (int j = 1; j <= k; j++) {
              const double complex *Rj = R + (size_t)j * dd, *omp = om + (size_t)(k - j) * d * gd + a * d;
              for (size_t l = 0; l < d; l++) y += Rj[l * d + r] * omp[l];
            }
            if (r >= g0 && r < g1) {
              wk[a * gd + (r - g0)] = y;
              continue;
            }
            for (int i = 1; i < k; i++) {
              const double complex *omi = om + (size_t)i * d * gd, *wki = w + (size_t)(k - i) * gd * gd;
              for (size_t b = 0; b < gd; b++) y -= omi[b * d + r] * wki[a * gd + b];
            }
            omk[a * d + r] = y / (mean - m[r]);
          }
        }
      }
      if (gd == 1) {
        mu[g0 * (size_t)(Kp + 1)] = m[g0];
        for (int k = 1; k <= Kp; k++) mu[g0 * (size_t)(Kp + 1) + (size_t)k] = creal(w[(size_t)k]);
        split[g0] = ord0;
        for (size_t l = 0; l < d; l++) z[g0 * d + l] = c[g0 * d + l];
      } else {
        st = eigseries(ctx, gd, Kp - 1, w + gd * gd, tol, ord0 + 1, sub, zs, ss);
        if (!st) {
          for (size_t i = 0; i < gd; i++) {
            double *mi = mu + (g0 + i) * (size_t)(Kp + 1);
            mi[0] = mean;
            for (int k = 1; k <= Kp; k++) mi[k] = sub[i * (size_t)Kp + (size_t)(k - 1)];
            split[g0 + i] = ss[i];
            for (size_t l = 0; l < d; l++) {
              double complex s = 0;
              for (size_t b = 0; b < gd; b++) s += c[(g0 + b) * d + l] * zs[i * gd + b];
              z[(g0 + i) * d + l] = s;
            }
          }
        }
      }
    }
    lvsi_free(ctx, om);
    lvsi_free(ctx, w);
    lvsi_free(ctx, sub);
    lvsi_free(ctx, zs);
    lvsi_free(ctx, ss);
    g0 = g1;
  }
done:
  lvsi_free(ctx, c);
  lvsi_free(ctx, m);
  lvsi_free(ctx, R);
  lvsi_free(ctx, t);
  return st;
}

/* ---- public API ------------------------------------------------------- */
void lvs_series_free(lvs_series *s) {
  if (!s) return;
  lvs_ctx *ctx = s->ctx;
  if (s->psi)
    for (size_t i = 0; i < s->n; i++) lvsi_free(ctx, s->psi[i]);
  lvsi_free(ctx, s->psi);
  lvsi_free(ctx, s->e0);
  lvsi_free(ctx, s->e);
  lvsi_free(ctx, s->done);
  lvsi_free(ctx, s->split);
  lvsi_free(ctx, s->group);
  lvsi_free(ctx, s->mind);
  lvsi_free(ctx, s->nstates);
  lvsi_free(ctx, s);
}

static double colnorm1(const lvs_matrix *v) {
  double best = 0;
  for (size_t j = 0; j < v->cols; j++) {
    double sum = 0;
    if (v->sparse) {
      for (size_t k = v->cp[j]; k < v->cp[j + 1]; k++)
        sum += v->cplx ? hypot(v->a[2 * k], v->a[2 * k + 1]) : fabs(v->a[k]);
    } else {
      for (size_t i = 0; i < v->rows; i++) sum += cabs(lvsi_mat_at(v, i, j));
    }
    if (sum > best) best = sum;
  }
  return best;
}

typedef struct {
  double e;
  size_t i;
} ekey;
static int cmp_ekey(const void *a, const void *b) {
  const ekey *x = a, *y = b;
  if (x->e < y->e) return -1;
  if (x->e > y->e) return 1;
  return (x->i > y->i) - (x->i < y->i);
}

int lvs_series_new(const lvs_matrix *h0, const lvs_matrix *v, int order, const size_t *levels,
                   size_t nlevels, double degen_tol, int normalized, lvs_series **out) {
  lvs_ctx *ctx = h0->ctx;
  *out = NULL;
  int st = lvsi_check_hermitian(h0, LVS_DEFAULT_HERM_TOL, "H0");
  if (st) return st;
  size_t n = lvs_matrix_rows(h0);
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n)
    return lvsi_fail(ctx, LVS_EDIM, "V is %zux%zu but H0 is %zux%zu", lvs_matrix_rows(v), lvs_matrix_cols(v), n, n);
  if ((st = lvsi_check_hermitian(v, LVS_DEFAULT_HERM_TOL, "V"))) return st;
  if (order < 1 || order > 1000) return lvsi_fail(ctx, LVS_ERANGE, "order must be from 1 to 1000, got %d", order);
  if (!(degen_tol >= 0) || degen_tol > 0.5)
    return lvsi_fail(ctx, LVS_EINVAL, "degen_tol must be from 0 to 0.5, got %g", degen_tol);
  for (size_t i = 0; i < nlevels; i++)
    if (levels[i] >= n) return lvsi_fail(ctx, LVS_ERANGE, "level %zu is out of range 1..%zu", levels[i] + 1, n);
  int K = order;
  lvs_series *s = lvsi_calloc(ctx, 1, sizeof *s);
  if (!s) return lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
  s->ctx = ctx;
  s->n = n;
  s->K = K;
  s->normalized = normalized;
  s->e0 = lvsi_calloc(ctx, n, sizeof *s->e0);
  s->e = lvsi_calloc(ctx, n * (size_t)(K + 1), sizeof *s->e);
  s->done = lvsi_calloc(ctx, n, sizeof *s->done);
  s->split = lvsi_calloc(ctx, n, sizeof *s->split);
  s->group = lvsi_calloc(ctx, n, sizeof *s->group);
  s->mind = lvsi_calloc(ctx, n, sizeof *s->mind);
  s->nstates = lvsi_calloc(ctx, n, sizeof *s->nstates);
  s->psi = lvsi_calloc(ctx, n, sizeof *s->psi);
  lvs_matrix *hp = NULL, *vb = NULL, *U = NULL, *tmp = NULL, *uadj = NULL;
  size_t *perm = NULL, *P = NULL;
  unsigned char *want = NULL;
  double complex *xo = NULL, *yo = NULL, *om = NULL, *w = NULL, *zz = NULL, *y = NULL;
  double *mu = NULL;
  int *sp = NULL;
  if (!s->e0 || !s->e || !s->done || !s->split || !s->group || !s->mind || !s->nstates || !s->psi) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto fail;
  }
  perm = lvsi_malloc(ctx, n * sizeof *perm);
  want = lvsi_calloc(ctx, n, 1);
  xo = lvsi_malloc(ctx, n * sizeof *xo);
  yo = lvsi_malloc(ctx, n * sizeof *yo);
  y = lvsi_malloc(ctx, n * sizeof *y);
  if (!perm || !want || !xo || !yo || !y) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
    goto fail;
  }
  /* is H0 diagonal? */
  if ((st = lvs_matrix_visible(h0, 0, &hp))) goto fail;
  int diag = 1;
  if (hp->sparse) {
    for (size_t j = 0; j < n && diag; j++)
      for (size_t k = hp->cp[j]; k < hp->cp[j + 1]; k++)
        if (hp->ri[k] != j && (hp->a[hp->cplx ? 2 * k : k] != 0 || (hp->cplx && hp->a[2 * k + 1] != 0))) diag = 0;
  } else {
    for (size_t j = 0; j < n && diag; j++)
      for (size_t i = 0; i < n; i++)
        if (i != j && lvsi_mat_at(hp, i, j) != 0) {
          diag = 0;
          break;
        }
  }
  double *ediag = s->e0;
  if (diag) {
    ekey *raw = lvsi_malloc(ctx, n * sizeof *raw);
    if (!raw) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
      goto fail;
    }
    for (size_t i = 0; i < n; i++) {
      raw[i].e = creal(lvsi_mat_at(hp, i, i));
      raw[i].i = i;
    }
    qsort(raw, n, sizeof *raw, cmp_ekey);
    for (size_t i = 0; i < n; i++) {
      ediag[i] = raw[i].e;
      perm[i] = raw[i].i;
    }
    lvsi_free(ctx, raw);
    if ((st = lvs_matrix_visible(v, 0, &vb))) goto fail; /* stays sparse when sparse */
  } else {
    if ((st = lvs_eigen(h0, 0, 1, ediag, &U))) goto fail;
    for (size_t i = 0; i < n; i++) perm[i] = i;
    if ((st = lvs_matrix_adj(U, &uadj))) goto fail;
    if ((st = lvs_matrix_mul(v, U, &tmp))) goto fail;
    lvs_matrix *vr = NULL;
    if ((st = lvs_matrix_mul(uadj, tmp, &vr))) goto fail;
    st = lvs_matrix_visible(vr, 1, &vb);
    lvs_matrix_free(vr);
    if (st) goto fail;
  }
  {
    lvs_matrix *vp = NULL;
    if ((st = lvs_matrix_visible(v, 0, &vp))) goto fail;
    s->vnorm = colnorm1(vp);
    lvs_matrix_free(vp);
  }
  vapply va = {vb, perm, n, xo, yo};
  if (nlevels == 0)
    memset(want, 1, n);
  else
    for (size_t i = 0; i < nlevels; i++) want[levels[i]] = 1;
  /* groups */
  double emin = ediag[0], emax = ediag[n - 1], big = 0;
  for (size_t i = 0; i < n; i++) big = fmax(big, fabs(ediag[i]));
  double gtol = degen_tol * fmax(emax - emin, big);
  size_t g0 = 0, gid = 0;
  while (g0 < n) {
    size_t g1 = g0 + 1;
    while (g1 < n && ediag[g1] - ediag[g1 - 1] <= gtol) g1++;
    size_t d = g1 - g0;
    int need = 0;
    for (size_t i = g0; i < g1; i++) {
      s->group[i] = gid;
      need |= want[i];
    }
    if (!need) {
      g0 = g1;
      gid++;
      continue;
    }
    double ep = 0;
    for (size_t i = g0; i < g1; i++) ep += ediag[i] / (double)d;
    P = lvsi_malloc(ctx, d * sizeof *P);
    om = lvsi_malloc(ctx, (size_t)(K + 1) * n * d * sizeof *om);
    w = lvsi_malloc(ctx, (size_t)(K + 1) * d * d * sizeof *w);
    if (!P || !om || !w) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (group of %zu levels, order %d)", d, K);
      goto fail;
    }
    for (size_t a = 0; a < d; a++) P[a] = g0 + a;
    double md = INFINITY;
    if ((st = bloch_big(ctx, &va, ediag, ep, P, d, K, om, w, &md))) goto fail;
    if (d == 1) {
      double *e = s->e + g0 * (size_t)(K + 1);
      e[0] = ep;
      for (int k = 1; k <= K; k++) e[k] = creal(w[k]);
      s->split[g0] = 0;
      s->mind[g0] = md;
      s->done[g0] = 1;
      /* states: psi(k) = Omega(k) e_n, optionally normalized */
      double complex *ps = lvsi_malloc(ctx, (size_t)(K + 1) * n * sizeof *ps);
      if (!ps) {
        st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (states)");
        goto fail;
      }
      if (normalized) {
        double complex *sk = lvsi_calloc(ctx, (size_t)K + 1, sizeof *sk), *ck = lvsi_calloc(ctx, (size_t)K + 1, sizeof *ck);
        if (!sk || !ck) {
          lvsi_free(ctx, sk);
          lvsi_free(ctx, ck);
          lvsi_free(ctx, ps);
          st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (states)");
          goto fail;
        }
        for (int k = 1; k <= K; k++)
          for (int j = 1; j < k; j++) {
            const double complex *a = om + (size_t)j * n, *b = om + (size_t)(k - j) * n;
            for (size_t q = 0; q < n; q++) sk[k] += conj(a[q]) * b[q];
          }
        ck[0] = 1;
        for (int k = 1; k <= K; k++) {
          double complex acc = 0;
          for (int j = 1; j <= k; j++) acc += ((double)j / 2.0 - (double)k) * sk[j] * ck[k - j];
          ck[k] = acc / (double)k;
        }
        for (int k = 0; k <= K; k++)
          for (size_t q = 0; q < n; q++) {
            double complex acc = 0;
            for (int j = 0; j <= k; j++) acc += ck[j] * om[(size_t)(k - j) * n + q];
            ps[(size_t)k * n + q] = acc;
          }
        lvsi_free(ctx, sk);
        lvsi_free(ctx, ck);
      } else {
        memcpy(ps, om, (size_t)(K + 1) * n * sizeof *ps);
      }
      /* back to the original basis */
      for (int k = 0; k <= K && !st; k++) {
        double complex *pk = ps + (size_t)k * n;
        if (U) {
          memcpy(xo, pk, n * sizeof *xo);
          st = lvs_matrix_apply(U, 1, (const double *)xo, (double *)pk);
        } else {
          for (size_t q = 0; q < n; q++) xo[perm[q]] = pk[q];
          memcpy(pk, xo, n * sizeof *pk);
        }
      }
      s->psi[g0] = ps;
      s->nstates[g0] = K + 1;
      if (st) goto fail;
    } else {
      mu = lvsi_malloc(ctx, d * (size_t)K * sizeof *mu);
      zz = lvsi_malloc(ctx, d * d * sizeof *zz);
      sp = lvsi_malloc(ctx, d * sizeof *sp);
      if (!mu || !zz || !sp) {
        st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory");
        goto fail;
      }
      double stol = degen_tol > 0 ? degen_tol : 1e-10;
      if ((st = eigseries(ctx, d, K - 1, w + d * d, stol, 1, mu, zz, sp))) goto fail;
      for (size_t i = 0; i < d; i++) {
        size_t lev = g0 + i;
        double *e = s->e + lev * (size_t)(K + 1);
        e[0] = ep;
        for (int k = 1; k <= K; k++) e[k] = mu[i * (size_t)K + (size_t)(k - 1)];
        s->split[lev] = sp[i];
        s->mind[lev] = md;
        s->done[lev] = 1;
        double complex *ps = lvsi_calloc(ctx, n, sizeof *ps);
        if (!ps) {
          st = lvsi_fail(ctx, LVS_ENOMEM, "perturb: out of memory (states)");
          goto fail;
        }
        for (size_t a = 0; a < d; a++) y[a] = zz[i * d + a];
        memset(xo, 0, n * sizeof *xo);
        for (size_t a = 0; a < d; a++) xo[P[a]] = y[a];
        if (U) {
          st = lvs_matrix_apply(U, 1, (const double *)xo, (double *)ps);
        } else {
          for (size_t q = 0; q < n; q++) ps[perm[q]] = xo[q];
        }
        s->psi[lev] = ps;
        s->nstates[lev] = 1;
        if (st) goto fail;
      }
      lvsi_free(ctx, mu);
      lvsi_free(ctx, zz);
      lvsi_free(ctx, sp);
      mu = NULL;
      zz = NULL;
      sp = NULL;
    }
    lvsi_free(ctx, P);
    lvsi_free(ctx, om);
    lvsi_free(ctx, w);
    P = NULL;
    om = NULL;
    w = NULL;
    g0 = g1;
    gid++;
  }
  st = LVS_OK;
fail:
  lvs_matrix_free(hp);
  lvs_matrix_free(vb);
  lvs_matrix_free(U);
  lvs_matrix_free(tmp);
  lvs_matrix_free(uadj);
  lvsi_free(ctx, perm);
  lvsi_free(ctx, want);
  lvsi_free(ctx, xo);
  lvsi_free(ctx, yo);
  lvsi_free(ctx, y);
  lvsi_free(ctx, P);
  lvsi_free(ctx, om);
  lvsi_free(ctx, w);
  lvsi_free(ctx, mu);
  lvsi_free(ctx, zz);
  lvsi_free(ctx, sp);
  if (st) {
    lvs_series_free(s);
    return st;
  }
  *out = s;
  return LVS_OK;
}

size_t lvs_series_dim(const lvs_series *s) { return s->n; }
int lvs_series_order(const lvs_series *s) { return s->K; }
double lvs_series_vnorm(const lvs_series *s) { return s->vnorm; }

static int lev_ok(const lvs_series *s, size_t level) {
  if (level >= s->n)
    return lvsi_fail(s->ctx, LVS_ERANGE, "level %zu is out of range 1..%zu", level + 1, s->n);
  if (!s->done[level])
    return lvsi_fail(s->ctx, LVS_ERANGE, "level %zu was not computed (not in 'levels')", level + 1);
  return LVS_OK;
}

int lvs_series_has(const lvs_series *s, size_t level) { return level < s->n && s->done[level]; }

int lvs_series_energy(const lvs_series *s, size_t level, int k, double *e) {
  int st = lev_ok(s, level);
  if (st) return st;
  if (k < 0 || k > s->K) return lvsi_fail(s->ctx, LVS_ERANGE, "order %d is out of range 0..%d", k, s->K);
  *e = s->e[level * (size_t)(s->K + 1) + (size_t)k];
  return LVS_OK;
}

int lvs_series_at(const lvs_series *s, size_t level, double lambda, double *e) {
  int st = lev_ok(s, level);
  if (st) return st;
  const double *c = s->e + level * (size_t)(s->K + 1);
  double acc = 0;
  for (int k = s->K; k >= 0; k--) acc = acc * lambda + c[k];
  *e = acc;
  return LVS_OK;
}

int lvs_series_info(const lvs_series *s, size_t level, size_t *group, int *split_order, double *min_denominator,
                    int *state_orders) {
  int st = lev_ok(s, level);
  if (st) return st;
  if (group) *group = s->group[level];
  if (split_order) *split_order = s->split[level];
  if (min_denominator) *min_denominator = s->mind[level];
  if (state_orders) *state_orders = s->nstates[level] - 1;
  return LVS_OK;
}

int lvs_series_state(const lvs_series *s, size_t level, int k, double *psi) {
  int st = lev_ok(s, level);
  if (st) return st;
  if (k < 0 || k > s->K) return lvsi_fail(s->ctx, LVS_ERANGE, "order %d is out of range 0..%d", k, s->K);
  if (k >= s->nstates[level])
    return lvsi_fail(s->ctx, LVS_ERANGE,
                     "state corrections of level %zu (member of a degenerate group) are available at order 0 only",
                     level + 1);
  memcpy(psi, s->psi[level] + (size_t)k * s->n, s->n * sizeof(double complex));
  return LVS_OK;
}
