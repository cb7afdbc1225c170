/* effective.c -- effective Hamiltonian of a chosen group of levels of H0
 * under lambda*V, to any order K (1..50).
 *
 * Method (../shared/METHODS.md section 2):
 *   1. work in the eigenbasis of H0 (levels in ascending energy); P = the
 *      group, Q = the rest;
 *   2. Bloch wave operator recursion (Bloch, Nucl. Phys. 6, 329 (1958)):
 *        W(k) = P V Omega(k-1),
 *        Omega(k)_ma = [(V Omega(k-1))_ma - sum_{i=1..k-1} (Omega(i) W(k-i))_ma]
 *                      / (E_a - E_m),
 *      H_Bloch = diag(E_a) + sum_k lambda^k W(k);
 *   3. des Cloizeaux symmetrization (des Cloizeaux, Nucl. Phys. 20, 321
 *      (1960)): N = Omega^dag Omega = 1 + X, H = N^{1/2} H_Bloch N^{-1/2},
 *      (1 + X)^{+-1/2} = sum_j binom(+-1/2, j) X^j, every product truncated
 *      order by order in lambda. The result is the canonical Van Vleck /
 *      Schrieffer-Wolff series (Van Vleck, Phys. Rev. 33, 467 (1929);
 *      Schrieffer & Wolff, Phys. Rev. 149, 491 (1966); Bravyi, DiVincenzo,
 *      Loss, Ann. Phys. 326, 2793 (2011)); see also Shavitt & Redmon,
 *      J. Chem. Phys. 73, 5711 (1980).
 * Only matrix products are needed, so exactly degenerate, nearly degenerate
 * and spread-out groups are handled alike as long as no group level is
 * degenerate with a level outside the group.
 */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

typedef double complex cplx;

struct lvs_effective {
  lvs_ctx *ctx;
  size_t n, d;
  int order;
  size_t *levels; /* d, 0-based, ascending */
  size_t *states; /* d: basis state of each group level (diagonal H0), else SIZE_MAX */
  cplx *terms;    /* (order+1) blocks of d*d, column-major */
  int complex_result;
  char *warn;     /* "" when none; lines separated by '\n' */
};

#define T(e, k) ((e)->terms + (size_t)(k) * (e)->d * (e)->d)

/* C += A * B for d x d column-major blocks */
static void mm_acc(size_t d, const cplx *a, const cplx *b, cplx *c) {
  for (size_t j = 0; j < d; j++)
    for (size_t l = 0; l < d; l++) {
      cplx blj = b[l + j * d];
      if (blj == 0) continue;
      for (size_t i = 0; i < d; i++) c[i + j * d] += a[i + l * d] * blj;
    }
}

/* truncated series product: C(k) = sum_{i+j=k} A(i) B(j), k = 0..K */
static void series_mul(size_t d, int K, const cplx *a, const cplx *b, cplx *c) {
  size_t dd = d * d;
  memset(c, 0, (size_t)(K + 1) * dd * sizeof(cplx));
  for (int k = 0; k <= K; k++)
    for (int i = 0; i <= k; i++) mm_acc(d, a + (size_t)i * dd, b + (size_t)(k - i) * dd, c + (size_t)k * dd);
}

static int addwarn(lvs_effective *e, const char *text) {
  size_t old = e->warn ? strlen(e->warn) : 0, add = strlen(text);
  char *w = lvsi_malloc(e->ctx, old + add + 2);
  if (!w) return lvsi_fail(e->ctx, LVS_ENOMEM, "out of memory in effective");
  if (old) {
    memcpy(w, e->warn, old);
    w[old++] = '\n';
  }
  memcpy(w + old, text, add + 1);
  lvsi_free(e->ctx, e->warn);
  e->warn = w;
  return LVS_OK;
}

void lvs_effective_free(lvs_effective *e) {
  if (!e) return;
  lvs_ctx *ctx = e->ctx;
  lvsi_free(ctx, e->levels);
  lvsi_free(ctx, e->states);
  lvsi_free(ctx, e->terms);
  lvsi_free(ctx, e->warn);
  lvsi_free(ctx, e);
}

static int is_diagonal(const lvs_matrix *h) {
  if (h->sparse && !h->vis) {
    for (size_t j = 0; j < h->cols; j++)
      for (size_t k = h->cp[j]; k < h->cp[j + 1]; k++)
        if (h->ri[k] != j && lvsi_mat_at(h, h->ri[k], j) != 0) return 0;
    return 1;
  }
  for (size_t j = 0; j < h->cols; j++)
    for (size_t i = 0; i < h->rows; i++)
      if (i != j && lvsi_mat_at(h, i, j) != 0) return 0;
  return 1;
}

/* list levels (1-based) as "3, 4" into buf */
static void fmt_levels(char *buf, size_t cap, const size_t *lv, size_t cnt) {
  size_t used = 0;
  buf[0] = 0;
  for (size_t i = 0; i < cnt && used + 24 < cap; i++)
    used += (size_t)snprintf(buf + used, cap - used, "%s%zu", i ? ", " : "", lv[i] + 1);
}

int lvs_effective_new(const lvs_matrix *h0, const lvs_matrix *v, const size_t *levels, size_t nlevels, int order,
                      lvs_effective **out) {
  lvs_ctx *ctx = h0->ctx;
  *out = NULL;
  int st;
  if (order < 1 || order > 50) return lvsi_fail(ctx, LVS_ERANGE, "order must be from 1 to 50, got %d", order);
  if ((st = lvsi_check_hermitian(h0, LVS_DEFAULT_HERM_TOL, "H0"))) return st;
  size_t n = lvs_matrix_rows(h0);
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n)
    return lvsi_fail(ctx, LVS_EDIM, "V must be %zux%zu like H0, got %zux%zu", n, n, lvs_matrix_rows(v),
                     lvs_matrix_cols(v));
  if ((st = lvsi_check_hermitian(v, LVS_DEFAULT_HERM_TOL, "V"))) return st;
  if (nlevels == 0) return lvsi_fail(ctx, LVS_EINVAL, "the group of levels is empty");
  for (size_t i = 0; i < nlevels; i++) {
    if (levels[i] >= n) return lvsi_fail(ctx, LVS_ERANGE, "level %zu is out of range 1..%zu", levels[i] + 1, n);
    for (size_t j = 0; j < i; j++)
      if (levels[j] == levels[i]) return lvsi_fail(ctx, LVS_EINVAL, "level %zu is given twice", levels[i] + 1);
  }
  if (nlevels == n) return lvsi_fail(ctx, LVS_EINVAL, "the group holds every level; nothing is left to fold in");
  if ((st = lvsi_dense_ok(ctx, n, n, 3 * sizeof(cplx), "effective (working arrays)"))) return st;

  lvs_effective *e = lvsi_calloc(ctx, 1, sizeof *e);
  lvs_matrix *hp = NULL, *vp = NULL, *u = NULL;
  double *E = NULL;
  cplx *vt = NULL, *tmp = NULL, *om = NULL, *vom = NULL, *work = NULL;
  size_t *perm = NULL, *q = NULL;
  char *inP = NULL;
  if (!e) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in effective");
  e->ctx = ctx;
  e->n = n;
  e->d = nlevels;
  e->order = order;
  size_t d = nlevels, nq = n - d, dd = d * d;
  int K = order;
  E = lvsi_malloc(ctx, n * sizeof(double));
  perm = lvsi_malloc(ctx, n * sizeof(size_t));
  e->levels = lvsi_malloc(ctx, d * sizeof(size_t));
  e->states = lvsi_malloc(ctx, d * sizeof(size_t));
  q = lvsi_malloc(ctx, (nq ? nq : 1) * sizeof(size_t));
  inP = lvsi_calloc(ctx, n, 1);
  vt = lvsi_malloc(ctx, n * n * sizeof(cplx));
  tmp = lvsi_malloc(ctx, n * n * sizeof(cplx));
  e->terms = lvsi_calloc(ctx, (size_t)(K + 1) * dd, sizeof(cplx));
  if (!E || !perm || !e->levels || !e->states || !q || !inP || !vt || !tmp || !e->terms) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in effective");
    goto fail;
  }
  if ((st = lvs_matrix_visible(h0, 1, &hp)) || (st = lvs_matrix_visible(v, 1, &vp))) goto fail;

  /* eigenbasis of H0: a diagonal H0 keeps its basis states (stable sort) */
  int diag = is_diagonal(hp);
  if (diag) {
    for (size_t i = 0; i < n; i++) perm[i] = i;
    for (size_t i = 1; i < n; i++) { /* insertion sort, stable */
      size_t p = perm[i], j = i;
      double x = creal(lvsi_mat_at(hp, p, p));
      while (j > 0 && creal(lvsi_mat_at(hp, perm[j - 1], perm[j - 1])) > x) {
        perm[j] = perm[j - 1];
        j--;
      }
      perm[j] = p;
    }
    for (size_t i = 0; i < n; i++) E[i] = creal(lvsi_mat_at(hp, perm[i], perm[i]));
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) vt[i + j * n] = lvsi_mat_at(vp, perm[i], perm[j]);
  } else {
    if ((st = lvs_eigen(hp, 0, 1, E, &u))) goto fail;
    /* tmp = V U, vt = U^dag tmp */
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        cplx s = 0;
        for (size_t l = 0; l < n; l++) s += lvsi_mat_at(vp, i, l) * lvsi_mat_at(u, l, j);
        tmp[i + j * n] = s;
      }
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        cplx s = 0;
        for (size_t l = 0; l < n; l++) s += conj(lvsi_mat_at(u, l, i)) * tmp[l + j * n];
        vt[i + j * n] = s;
      }
  }

  /* the group, sorted; the rest */
  for (size_t i = 0; i < d; i++) {
    size_t x = levels[i], j = i;
    while (j > 0 && e->levels[j - 1] > x) {
      e->levels[j] = e->levels[j - 1];
      j--;
    }
    e->levels[j] = x;
  }
  for (size_t i = 0; i < d; i++) {
    inP[e->levels[i]] = 1;
    e->states[i] = diag ? perm[e->levels[i]] : SIZE_MAX;
  }
  for (size_t i = 0, k = 0; i < n; i++)
    if (!inP[i]) q[k++] = i;
  const size_t *p = e->levels;

  /* degeneracy across the cut (METHODS section 2: relative tolerance 1e-10) */
  double emax = fabs(E[0]);
  for (size_t i = 0; i < n; i++)
    if (fabs(E[i]) > emax) emax = fabs(E[i]);
  double scale = E[n - 1] - E[0] > emax ? E[n - 1] - E[0] : emax;
  double dtol = 1e-10 * (scale > 0 ? scale : 1.0);
  for (size_t a = 0; a < d; a++) {
    size_t miss[64], nm = 0;
    for (size_t m = 0; m < nq && nm < 64; m++)
      if (fabs(E[p[a]] - E[q[m]]) <= dtol) miss[nm++] = q[m];
    if (nm) {
      char buf[256];
      fmt_levels(buf, sizeof buf, miss, nm);
      st = lvsi_fail(ctx, LVS_EINVAL,
                     "the group cuts through a degenerate level of H0 (E = %.10g): level%s %s must come along "
                     "with level %zu",
                     E[p[a]], nm > 1 ? "s" : "", buf, p[a] + 1);
      goto fail;
    }
  }

  /* warning: gap small compared with the coupling */
  double gap = INFINITY, coup = 0.0, vmax = 0.0;
  for (size_t a = 0; a < d; a++)
    for (size_t m = 0; m < nq; m++) {
      double g = fabs(E[p[a]] - E[q[m]]), c = cabs(vt[q[m] + p[a] * n]);
      if (g < gap) gap = g;
      if (c > coup) coup = c;
    }
  for (size_t i = 0; i < n * n; i++)
    if (cabs(vt[i]) > vmax) vmax = cabs(vt[i]);
  if (coup > 0.25 * gap) {
    char buf[320];
    snprintf(buf, sizeof buf,
             "the gap %.4g between the group and the other levels is not large compared with the coupling "
             "max|V_am| = %.4g (ratio %.3g); the series in lambda may converge slowly or not at all",
             gap, coup, coup / gap);
    if ((st = addwarn(e, buf))) goto fail;
  }

  /* Bloch recursion. om: Omega(k) for k = 1..K, each nq x d (rows of Q). */
  om = lvsi_calloc(ctx, (size_t)(K + 1) * (nq ? nq : 1) * d, sizeof(cplx));
  vom = lvsi_malloc(ctx, n * d * sizeof(cplx));
  work = lvsi_calloc(ctx, (size_t)(3 * (K + 1) + 4) * dd, sizeof(cplx));
  if (!om || !vom || !work) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in effective");
    goto fail;
  }
  size_t qd = nq * d;
  cplx *W = lvsi_calloc(ctx, (size_t)(K + 1) * dd, sizeof(cplx)); /* W(k), k = 1..K */
  if (!W) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in effective");
    goto fail;
  }
  for (int k = 1; k <= K; k++) {
    /* vom = V Omega(k-1) (n x d) */
    if (k == 1) {
      for (size_t a = 0; a < d; a++)
        for (size_t x = 0; x < n; x++) vom[x + a * n] = vt[x + p[a] * n];
    } else {
      const cplx *o = om + (size_t)(k - 1) * qd;
      for (size_t a = 0; a < d; a++)
        for (size_t x = 0; x < n; x++) {
          cplx s = 0;
          for (size_t m = 0; m < nq; m++) s += vt[x + q[m] * n] * o[m + a * nq];
          vom[x + a * n] = s;
        }
    }
    cplx *Wk = W + (size_t)k * dd;
    for (size_t b = 0; b < d; b++)
      for (size_t a = 0; a < d; a++) Wk[a + b * d] = vom[p[a] + b * n];
    if (k == K) break; /* Omega(K) is not needed for H to order K */
    cplx *ok = om + (size_t)k * qd;
    for (size_t a = 0; a < d; a++)
      for (size_t m = 0; m < nq; m++) {
        cplx s = vom[q[m] + a * n];
        for (int i = 1; i <= k - 1; i++) {
          const cplx *oi = om + (size_t)i * qd, *wj = W + (size_t)(k - i) * dd;
          for (size_t b = 0; b < d; b++) s -= oi[m + b * nq] * wj[b + a * d];
        }
        ok[m + a * nq] = s / (E[p[a]] - E[q[m]]);
      }
  }

  /* series: HB (Bloch), X, N^{1/2}, N^{-1/2}; each (K+1) blocks */
  size_t sz = (size_t)(K + 1) * dd;
  cplx *HB = lvsi_calloc(ctx, sz, sizeof(cplx)), *X = lvsi_calloc(ctx, sz, sizeof(cplx)),
       *Xp = lvsi_calloc(ctx, sz, sizeof(cplx)), *Xn = lvsi_calloc(ctx, sz, sizeof(cplx)),
       *Sp = lvsi_calloc(ctx, sz, sizeof(cplx)), *Sm = lvsi_calloc(ctx, sz, sizeof(cplx)),
       *T1 = lvsi_calloc(ctx, sz, sizeof(cplx));
  if (!HB || !X || !Xp || !Xn || !Sp || !Sm || !T1) {
    lvsi_free(ctx, HB), lvsi_free(ctx, X), lvsi_free(ctx, Xp), lvsi_free(ctx, Xn);
    lvsi_free(ctx, Sp), lvsi_free(ctx, Sm), lvsi_free(ctx, T1), lvsi_free(ctx, W);
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in effective");
    goto fail;
  }
  for (size_t a = 0; a < d; a++) HB[a + a * d] = E[p[a]];
  memcpy(HB + dd, W + dd, (size_t)K * dd * sizeof(cplx));
  lvsi_free(ctx, W);
  /* X(k) = sum_{i+j=k, i,j>=1} Omega(i)^dag Omega(j) */
  for (int k = 2; k <= K; k++) {
    cplx *xk = X + (size_t)k * dd;
    for (int i = 1; i <= k - 1; i++) {
      const cplx *oi = om + (size_t)i * qd, *oj = om + (size_t)(k - i) * qd;
      for (size_t b = 0; b < d; b++)
        for (size_t a = 0; a < d; a++) {
          cplx s = 0;
          for (size_t m = 0; m < nq; m++) s += conj(oi[m + a * nq]) * oj[m + b * nq];
          xk[a + b * d] += s;
        }
    }
  }
  /* (1+X)^{+-1/2}: Xp holds X^j; binomial coefficients by recurrence */
  for (size_t a = 0; a < d; a++) Sp[a + a * d] = Sm[a + a * d] = 1.0;
  memset(Xp, 0, sz * sizeof(cplx));
  for (size_t a = 0; a < d; a++) Xp[a + a * d] = 1.0; /* X^0 */
  double cp = 1.0, cm = 1.0;
  for (int j = 1; 2 * j <= K; j++) {
    series_mul(d, K, Xp, X, Xn);
    memcpy(Xp, Xn, sz * sizeof(cplx));
    cp *= (0.5 - (j - 1)) / j;
    cm *= (-0.5 - (j - 1)) / j;
    for (size_t i = 0; i < sz; i++) {
      Sp[i] += cp * Xp[i];
      Sm[i] += cm * Xp[i];
    }
  }
  series_mul(d, K, Sp, HB, T1);
  series_mul(d, K, T1, Sm, e->terms);
  lvsi_free(ctx, HB), lvsi_free(ctx, X), lvsi_free(ctx, Xp), lvsi_free(ctx, Xn);
  lvsi_free(ctx, Sp), lvsi_free(ctx, Sm), lvsi_free(ctx, T1);

  /* internal check: each term must come out Hermitian up to rounding; then
   * remove the rounding */
  double defect = 0.0, big = 0.0;
  for (int k = 0; k <= K; k++) {
    cplx *t = T(e, k);
    for (size_t b = 0; b < d; b++)
      for (size_t a = 0; a <= b; a++) {
        double df = cabs(t[a + b * d] - conj(t[b + a * d]));
        if (df > defect) defect = df;
        if (cabs(t[a + b * d]) > big) big = cabs(t[a + b * d]);
        cplx h = 0.5 * (t[a + b * d] + conj(t[b + a * d]));
        t[a + b * d] = h;
        t[b + a * d] = conj(h);
      }
  }
  if (defect > 1e-8 * (big > 0 ? big : 1.0)) {
    char buf[200];
    snprintf(buf, sizeof buf, "the terms came out non-Hermitian by %.3g before symmetrization (largest entry %.3g); "
             "rounding is large, trust the result less", defect, big);
    if ((st = addwarn(e, buf))) goto fail;
  }
  e->complex_result = 0;
  for (size_t i = 0; i < sz; i++)
    if (cimag(e->terms[i]) != 0.0) {
      double re = fabs(creal(e->terms[i]));
      if (fabs(cimag(e->terms[i])) > 1e-14 * (re > vmax ? re : vmax)) e->complex_result = 1;
    }
  if (!e->warn && (st = addwarn(e, ""))) goto fail;
  if (e->warn[0] == '\n') memmove(e->warn, e->warn + 1, strlen(e->warn));
  (void)diag;
  lvs_matrix_free(hp), lvs_matrix_free(vp), lvs_matrix_free(u);
  lvsi_free(ctx, E), lvsi_free(ctx, perm), lvsi_free(ctx, q), lvsi_free(ctx, inP);
  lvsi_free(ctx, vt), lvsi_free(ctx, tmp), lvsi_free(ctx, om), lvsi_free(ctx, vom), lvsi_free(ctx, work);
  *out = e;
  return LVS_OK;
fail:
  lvs_matrix_free(hp), lvs_matrix_free(vp), lvs_matrix_free(u);
  lvsi_free(ctx, E), lvsi_free(ctx, perm), lvsi_free(ctx, q), lvsi_free(ctx, inP);
  lvsi_free(ctx, vt), lvsi_free(ctx, tmp), lvsi_free(ctx, om), lvsi_free(ctx, vom), lvsi_free(ctx, work);
  lvs_effective_free(e);
  return st;
}

size_t lvs_effective_dim(const lvs_effective *e) { return e->d; }
int lvs_effective_order(const lvs_effective *e) { return e->order; }
const size_t *lvs_effective_levels(const lvs_effective *e) { return e->levels; }
size_t lvs_effective_state(const lvs_effective *e, size_t i) { return i < e->d ? e->states[i] : SIZE_MAX; }

/* The level (0-based, ascending H0 energy, ties in basis order as in
 * lvs_effective_new) of basis state `state` when H0 is diagonal. */
int lvs_level_of_state(const lvs_matrix *h0, size_t state, size_t *level) {
  lvs_ctx *ctx = h0->ctx;
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0)) return lvsi_fail(ctx, LVS_EDIM, "H0 must be square");
  if (state >= n) return lvsi_fail(ctx, LVS_ERANGE, "state %zu is out of range 1..%zu", state + 1, n);
  lvs_matrix *hp = NULL;
  int st = lvs_matrix_visible(h0, 0, &hp);
  if (st) return st;
  if (!is_diagonal(hp)) {
    lvs_matrix_free(hp);
    return lvsi_fail(ctx, LVS_EINVAL, "H0 is not diagonal in its basis, so basis states are not levels");
  }
  double es = creal(lvsi_mat_at(hp, state, state));
  size_t lev = 0;
  for (size_t j = 0; j < n; j++) {
    double ej = creal(lvsi_mat_at(hp, j, j));
    if (ej < es || (ej == es && j < state)) lev++;
  }
  lvs_matrix_free(hp);
  *level = lev;
  return LVS_OK;
}
const char *lvs_effective_warnings(const lvs_effective *e) { return e->warn ? e->warn : ""; }

static int to_matrix(const lvs_effective *e, const cplx *blk, lvs_matrix **out) {
  int st = lvs_matrix_new(e->ctx, e->d, e->d, e->complex_result, out);
  if (st) return st;
  for (size_t j = 0; j < e->d; j++)
    for (size_t i = 0; i < e->d; i++) {
      cplx z = blk[i + j * e->d];
      if ((st = lvs_matrix_set(*out, i, j, creal(z), e->complex_result ? cimag(z) : 0.0))) {
        lvs_matrix_free(*out);
        *out = NULL;
        return st;
      }
    }
  return LVS_OK;
}

int lvs_effective_term(const lvs_effective *e, int k, lvs_matrix **out) {
  *out = NULL;
  if (k < 0 || k > e->order)
    return lvsi_fail(e->ctx, LVS_ERANGE, "order %d is out of range 0..%d", k, e->order);
  return to_matrix(e, T(e, k), out);
}

int lvs_effective_at(const lvs_effective *e, double lambda, int order, lvs_matrix **out) {
  *out = NULL;
  if (!isfinite(lambda)) return lvsi_fail(e->ctx, LVS_EINVAL, "lambda must be finite");
  if (order < 0 || order > e->order) order = e->order;
  size_t dd = e->d * e->d;
  cplx *s = lvsi_calloc(e->ctx, dd ? dd : 1, sizeof(cplx));
  if (!s) return lvsi_fail(e->ctx, LVS_ENOMEM, "out of memory in effective");
  for (int k = order; k >= 0; k--) /* Horner */
    for (size_t i = 0; i < dd; i++) s[i] = s[i] * lambda + T(e, k)[i];
  int st = to_matrix(e, s, out);
  lvsi_free(e->ctx, s);
  return st;
}
