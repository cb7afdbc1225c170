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
 *
 * Two paths fill W(k) and X(k) (step 2 and N - 1), then share step 3:
 *   - sparse (H0 diagonal in any storage): the basis states are the levels,
 *     V is read as stored, column by column; Omega(k) lives on the states
 *     reached from the group by at most k applications of V, numbered in
 *     order of discovery, so each Omega(k) is a dense block on a prefix of
 *     that list. Cost O(K d * entries of V in the reached columns + K^2 d^2
 *     * reached), memory O(K d * reached) plus one n-entry index; nothing
 *     n x n. The spectrum is a stable sort of the diagonal.
 *   - Krylov (H0 sparse, not diagonal, large; phase 3c): the group's
 *     vectors from ARPACK, Omega(k) by reduced-resolvent solves in the
 *     original basis (resolvent.c). O(K d) products and solves.
 *   - dense (H0 not diagonal, or LVS_EFFECTIVE_DENSE): lvs_eigen, V in
 *     the eigenbasis as an n x n array, Omega(k) on every level outside the
 *     group: O(n^2 d K) time, O(n^2) memory.
 * lvs_effective_new runs the phases check_args, plain_diagonal/sort_states
 * (spectrum and basis), sparse_path or dense_path (wave operator),
 * symmetrize, assemble.
 */
#include <cblas.h>
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
  double gap, coup; /* smallest gap to the levels outside, max|V_am| (gap_warning) */
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

/* xk += A^dag B for the d columns of two blocks of `rows` rows (leading
 * dimensions la, lb): the overlap X(k) = sum Omega(i)^dag Omega(k-i) of
 * every path */
static void overlap_acc(size_t d, size_t rows, const cplx *A, size_t la, const cplx *B, size_t lb, cplx *xk) {
  for (size_t b = 0; b < d; b++)
    for (size_t a = 0; a < d; a++) {
      cplx s = 0;
      for (size_t m = 0; m < rows; m++) s += conj(A[m + a * la]) * B[m + b * lb];
      xk[a + b * d] += s;
    }
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

/* ---- working state of one lvs_effective_new call ----------------------- */
typedef struct {
  lvs_ctx *ctx;
  size_t n, d;
  int K;
  lvs_matrix *hown, *vown;   /* plain copies of padded H0, V (NULL: read in place) */
  const lvs_matrix *hp, *vp; /* plain H0 and V */
  double *Es;                /* n: diagonal of H0 by basis state (diagonal H0 only) */
  double *E;                 /* n: H0 levels, ascending */
  size_t *perm;              /* n: level -> basis state (diagonal H0 only) */
  char *inP;                 /* n: level belongs to the group */
  cplx *W;                   /* (K+1) blocks d x d: W(k) = P V Omega(k-1); block 0 unused */
  cplx *X;                   /* (K+1) blocks d x d: X(k) = sum_{i+j=k} Omega(i)^dag Omega(j) */
  double coup, vmax;         /* max |V_am| (a in the group, m outside), max |V_ij| */
} ework;

static void ework_free(ework *w) {
  lvs_ctx *ctx = w->ctx;
  lvs_matrix_free(w->hown), lvs_matrix_free(w->vown);
  lvsi_free(ctx, w->Es), lvsi_free(ctx, w->E), lvsi_free(ctx, w->perm), lvsi_free(ctx, w->inP);
  lvsi_free(ctx, w->W), lvsi_free(ctx, w->X);
}

static int oom(lvs_ctx *ctx) { return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in effective"); }

/* entries of column j of a plain op: storage indices [k0, k1); the row of
 * entry k and its value (dense storage is column-major with ld = rows) */
static void col_span(const lvs_matrix *m, size_t j, size_t *k0, size_t *k1) {
  if (m->sparse) {
    *k0 = m->cp[j], *k1 = m->cp[j + 1];
  } else {
    *k0 = j * m->rows, *k1 = (j + 1) * m->rows;
  }
}
static inline size_t ent_row(const lvs_matrix *m, size_t j, size_t k) {
  return m->sparse ? m->ri[k] : k - j * m->rows;
}
static inline cplx ent_val(const lvs_matrix *m, size_t k) {
  return m->cplx ? CMPLX(m->a[2 * k], m->a[2 * k + 1]) : m->a[k];
}

/* ---- phase 1: argument checks ------------------------------------------ */
/* Order, Hermitian H0 and V (checked on plain copies: O(stored entries) for
 * a padded sparse op), sizes, the group. Fills w->hp, w->vp. */
static int check_args(ework *w, const lvs_matrix *h0, const lvs_matrix *v, const size_t *levels, size_t nlevels,
                      int order) {
  lvs_ctx *ctx = w->ctx;
  int st;
  if (order < 1 || order > 50) return lvsi_fail(ctx, LVS_ERANGE, "order must be from 1 to 50, got %d", order);
  if (h0->vis && (st = lvs_matrix_visible(h0, 0, &w->hown))) return st;
  w->hp = h0->vis ? w->hown : h0;
  if ((st = lvsi_check_hermitian(w->hp, LVS_DEFAULT_HERM_TOL, "H0"))) return st;
  size_t n = lvs_matrix_rows(h0);
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n)
    return lvsi_fail(ctx, LVS_EDIM, "V must be %zux%zu like H0, got %zux%zu", n, n, lvs_matrix_rows(v),
                     lvs_matrix_cols(v));
  if (v->vis && (st = lvs_matrix_visible(v, 0, &w->vown))) return st;
  w->vp = v->vis ? w->vown : v;
  if ((st = lvsi_check_hermitian(w->vp, LVS_DEFAULT_HERM_TOL, "V"))) return st;
  if (nlevels == 0) return lvsi_fail(ctx, LVS_EINVAL, "the group of levels is empty");
  for (size_t i = 0; i < nlevels; i++) {
    if (levels[i] >= n) return lvsi_fail(ctx, LVS_ERANGE, "level %zu is out of range 1..%zu", levels[i] + 1, n);
    for (size_t j = 0; j < i; j++)
      if (levels[j] == levels[i]) return lvsi_fail(ctx, LVS_EINVAL, "level %zu is given twice", levels[i] + 1);
  }
  if (nlevels == n) return lvsi_fail(ctx, LVS_EINVAL, "the group holds every level; nothing is left to fold in");
  w->n = n;
  w->d = nlevels;
  w->K = order;
  return LVS_OK;
}

/* ---- phase 2: H0's spectrum and basis ---------------------------------- */
/* The diagonal of a plain H0 into w->Es when H0 is diagonal (1), else 0;
 * O(stored entries) for a sparse H0. */
static int plain_diagonal(ework *w) {
  const lvs_matrix *h = w->hp;
  size_t n = w->n;
  for (size_t j = 0; j < n; j++) {
    size_t k0, k1;
    w->Es[j] = 0.0;
    col_span(h, j, &k0, &k1);
    for (size_t k = k0; k < k1; k++) {
      cplx z = ent_val(h, k);
      if (ent_row(h, j, k) == j)
        w->Es[j] = creal(z);
      else if (z != 0)
        return 0;
    }
  }
  return 1;
}

/* w->perm = basis states by ascending Es, ties in basis order (a stable
 * sort), and w->E the sorted energies. Bottom-up merging of the ascending
 * runs already present: a product basis (a few sorted runs) costs
 * O(n log runs). Each merged segment holds a contiguous interval of basis
 * indices, so equal keys across a segment boundary are in basis order. */
static int sort_states(ework *w) {
  size_t n = w->n, *a = w->perm, *b = lvsi_malloc(w->ctx, n * sizeof *b);
  const double *x = w->Es;
  if (!b) return oom(w->ctx);
  for (size_t i = 0; i < n; i++) a[i] = i;
  for (;;) {
    size_t runs = 0;
    for (size_t i = 0; i < n; runs++) {
      size_t m = i + 1, h;
      while (m < n && x[a[m - 1]] <= x[a[m]]) m++;
      h = m < n ? m + 1 : m;
      while (h < n && x[a[h - 1]] <= x[a[h]]) h++;
      size_t l = i, r = m, o = i;
      while (l < m && r < h) b[o++] = x[a[r]] < x[a[l]] ? a[r++] : a[l++];
      while (l < m) b[o++] = a[l++];
      while (r < h) b[o++] = a[r++];
      i = h;
    }
    size_t *t = a;
    a = b, b = t;
    if (runs <= 1) break;
  }
  if (a != w->perm) {
    memcpy(w->perm, a, n * sizeof *a);
    b = a;
  }
  lvsi_free(w->ctx, b);
  for (size_t i = 0; i < n; i++) w->E[i] = x[w->perm[i]];
  return LVS_OK;
}

/* the group, sorted, into e->levels; w->inP; basis states of the members */
static void group_levels(lvs_effective *e, ework *w, const size_t *levels, int diag) {
  size_t d = w->d;
  for (size_t i = 0; i < d; i++) {
    size_t x = levels[i], j = i;
    while (j > 0 && e->levels[j - 1] > x) {
      e->levels[j] = e->levels[j - 1];
      j--;
    }
    e->levels[j] = x;
  }
  for (size_t i = 0; i < d; i++) {
    w->inP[e->levels[i]] = 1;
    e->states[i] = diag ? w->perm[e->levels[i]] : SIZE_MAX;
  }
}

/* No group level may be degenerate with a level left outside (METHODS
 * section 2: relative tolerance 1e-10); then the gap warning. E is sorted,
 * so the levels within tolerance of a member are a contiguous run around
 * it and the nearest outside levels are its first non-members either side:
 * O(d^2), not O(n d). */
static int check_cut(lvs_effective *e, ework *w) {
  const double *E = w->E;
  const size_t *p = e->levels;
  size_t n = w->n, d = w->d;
  double emax = fmax(fabs(E[0]), fabs(E[n - 1]));
  double scale = E[n - 1] - E[0] > emax ? E[n - 1] - E[0] : emax;
  double dtol = 1e-10 * (scale > 0 ? scale : 1.0);
  for (size_t a = 0; a < d; a++) {
    size_t L = p[a], lo = L, hi = L, miss[64], nm = 0;
    while (lo > 0 && fabs(E[L] - E[lo - 1]) <= dtol) lo--;
    while (hi + 1 < n && fabs(E[L] - E[hi + 1]) <= dtol) hi++;
    for (size_t m = lo; m <= hi && nm < 64; m++)
      if (!w->inP[m]) miss[nm++] = m;
    if (nm) {
      char buf[256];
      fmt_levels(buf, sizeof buf, miss, nm);
      return lvsi_fail(w->ctx, LVS_EINVAL,
                       "the group cuts through a degenerate level of H0 (E = %.10g): level%s %s must come along "
                       "with level %zu",
                       E[L], nm > 1 ? "s" : "", buf, L + 1);
    }
  }
  return LVS_OK;
}

static int gap_warning(lvs_effective *e, ework *w) {
  const double *E = w->E;
  size_t n = w->n;
  double gap = INFINITY;
  for (size_t a = 0; a < w->d; a++) {
    size_t L = e->levels[a], i = L, j = L;
    while (i > 0 && w->inP[i - 1]) i--;
    while (j + 1 < n && w->inP[j + 1]) j++;
    if (i > 0 && E[L] - E[i - 1] < gap) gap = E[L] - E[i - 1];
    if (j + 1 < n && E[j + 1] - E[L] < gap) gap = E[j + 1] - E[L];
  }
  e->gap = gap;
  e->coup = w->coup;
  if (w->coup > 0.25 * gap) {
    char buf[320];
    snprintf(buf, sizeof buf,
             "the gap %.4g between the group and the other levels is not large compared with the coupling "
             "max|V_am| = %.4g (ratio %.3g); the series in lambda may converge slowly or not at all",
             gap, w->coup, w->coup / gap);
    return addwarn(e, buf);
  }
  return LVS_OK;
}

/* ---- phase 3a: wave-operator recursion, dense path (general H0) -------- */
/* V in H0's eigenbasis as a dense n x n array (U^dag V U, or V permuted to
 * ascending energy when H0 is diagonal and the dense path was asked for);
 * Omega(k) on every Q row. O(n^2 d K) time, O(n^2) memory. */
/* vt = V in H0's eigenbasis, n x n (E filled by lvs_eigen when H0 is not
 * diagonal; a diagonal H0 only permutes V to ascending energy) */
static int dense_v(ework *w, const lvs_matrix *h0, const lvs_matrix *v, int diag, cplx *vt) {
  size_t n = w->n;
  lvs_matrix *hd = NULL, *vd = NULL, *u = NULL;
  cplx *tmp = NULL, *vz = NULL, *uz = NULL;
  int st;
  if ((st = lvs_matrix_visible(h0, 1, &hd)) || (st = lvs_matrix_visible(v, 1, &vd))) goto done;
  if (diag) {
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) vt[i + j * n] = lvsi_mat_at(vd, w->perm[i], w->perm[j]);
    goto done;
  }
  if ((st = lvsi_dense_ok(w->ctx, n, n, 3 * sizeof(cplx), "effective (V in the eigenbasis of H0)"))) goto done;
  tmp = lvsi_malloc(w->ctx, n * n * sizeof(cplx));
  vz = lvsi_malloc(w->ctx, n * n * sizeof(cplx));
  uz = lvsi_malloc(w->ctx, n * n * sizeof(cplx));
  if (!tmp || !vz || !uz) {
    st = oom(w->ctx);
    goto done;
  }
  if ((st = lvs_eigen(hd, 0, 1, w->E, &u))) goto done;
  /* tmp = V U, vt = U^dag tmp: two zgemm (was a triple loop of element
   * lookups: 45 s at n = 1600, now well under a second) */
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) vz[i + j * n] = lvsi_mat_at(vd, i, j), uz[i + j * n] = lvsi_mat_at(u, i, j);
  {
    cplx one = 1.0, zero = 0.0;
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, (int)n, (int)n, (int)n, &one, vz, (int)n, uz, (int)n, &zero,
                tmp, (int)n);
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, (int)n, (int)n, (int)n, &one, uz, (int)n, tmp, (int)n,
                &zero, vt, (int)n);
  }
done:
  lvs_matrix_free(hd), lvs_matrix_free(vd), lvs_matrix_free(u);
  lvsi_free(w->ctx, tmp);
  lvsi_free(w->ctx, vz);
  lvsi_free(w->ctx, uz);
  return st;
}

static int dense_path(lvs_effective *e, ework *w, const lvs_matrix *h0, const lvs_matrix *v, int diag) {
  lvs_ctx *ctx = w->ctx;
  size_t n = w->n, d = w->d, nq = n - d, dd = d * d, qd = nq * d;
  int K = w->K, st;
  cplx *vt = NULL, *om = NULL, *vom = NULL;
  size_t *q = NULL;
  if ((st = lvsi_dense_ok(ctx, n, n, 3 * sizeof(cplx), "effective (working arrays)"))) return st;
  vt = lvsi_malloc(ctx, n * n * sizeof(cplx));
  q = lvsi_malloc(ctx, (nq ? nq : 1) * sizeof(size_t));
  if (!vt || !q) {
    st = oom(ctx);
    goto done;
  }
  if ((st = dense_v(w, h0, v, diag, vt))) goto done;
  group_levels(e, w, e->levels, diag);
  const size_t *p = e->levels;
  for (size_t i = 0, k = 0; i < n; i++)
    if (!w->inP[i]) q[k++] = i;
  if ((st = check_cut(e, w))) goto done;
  for (size_t a = 0; a < d; a++)
    for (size_t m = 0; m < nq; m++) w->coup = fmax(w->coup, cabs(vt[q[m] + p[a] * n]));
  for (size_t i = 0; i < n * n; i++) w->vmax = fmax(w->vmax, cabs(vt[i]));
  if ((st = gap_warning(e, w))) goto done;

  /* om: Omega(k) for k = 1..K, each nq x d (rows of Q) */
  om = lvsi_calloc(ctx, (size_t)(K + 1) * (nq ? nq : 1) * d, sizeof(cplx));
  vom = lvsi_malloc(ctx, n * d * sizeof(cplx));
  if (!om || !vom) {
    st = oom(ctx);
    goto done;
  }
  for (int k = 1; k <= K; k++) {
    if ((st = lvsi_fence(ctx, "effective"))) goto done;
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
    cplx *Wk = w->W + (size_t)k * dd;
    for (size_t b = 0; b < d; b++)
      for (size_t a = 0; a < d; a++) Wk[a + b * d] = vom[p[a] + b * n];
    if (k == K) break; /* Omega(K) is not needed for H to order K */
    cplx *ok = om + (size_t)k * qd;
    for (size_t a = 0; a < d; a++)
      for (size_t m = 0; m < nq; m++) {
        cplx s = vom[q[m] + a * n];
        for (int i = 1; i <= k - 1; i++) {
          const cplx *oi = om + (size_t)i * qd, *wj = w->W + (size_t)(k - i) * dd;
          for (size_t b = 0; b < d; b++) s -= oi[m + b * nq] * wj[b + a * d];
        }
        ok[m + a * nq] = s / (w->E[p[a]] - w->E[q[m]]);
      }
  }
  /* X(k) = sum_{i+j=k, i,j>=1} Omega(i)^dag Omega(j) */
  for (int k = 2; k <= K; k++) {
    cplx *xk = w->X + (size_t)k * dd;
    for (int i = 1; i <= k - 1; i++) overlap_acc(d, nq, om + (size_t)i * qd, nq, om + (size_t)(k - i) * qd, nq, xk);
  }
done:
  lvsi_free(ctx, vt), lvsi_free(ctx, q), lvsi_free(ctx, om), lvsi_free(ctx, vom);
  return st;
}

/* ---- phase 3c: wave-operator recursion, Krylov path (sparse H0) -------- */
/* A large sparse H0 that is not diagonal (lvsi_krylov_pays: more than 1000 states,
 * a group of low levels): the lowest levels and their vectors P from the
 * Krylov path (lvs_eigen_ex), then the recursion in the original basis,
 *   W(k)_ba = <p_b| V Omega(k-1)_a>,
 *   Omega(k)_a = R_a [V Omega(k-1)_a - sum_{i=1..k-1} sum_b Omega(i)_b W(k-i)_ba],
 * Omega(0) = P, with R_a = Q (E_a - H0)^{-1} Q the reduced resolvent at the
 * member's own energy (resolvent.c: bordered sparse LU or MINRES; members
 * within the degeneracy tolerance share one). It is the dense path's
 * division by (E_a - E_m) done by solves. Cost per order: d products with V
 * and d solves; memory O(K n d). The cut and gap checks use the computed
 * levels (the next level above the group is always computed). */

static int krylov_applies(const ework *w, const size_t *levels) {
  size_t top = 0;
  for (size_t i = 0; i < w->d; i++) top = levels[i] > top ? levels[i] : top;
  return lvsi_krylov_pays(w->hp, top);
}


/* the cut check on the computed levels: no member degenerate with a level
 * left out (the level above the group is known, the ones below all are) */
static int krylov_cut(ework *w, const size_t *p, size_t m, double dtol) {
  for (size_t a = 0; a < w->d; a++) {
    size_t L = p[a];
    for (size_t x = 0; x < m; x++)
      if (!w->inP[x] && fabs(w->E[x] - w->E[L]) <= dtol)
        return lvsi_fail(w->ctx, LVS_EINVAL,
                         "the group cuts through a degenerate level of H0 (E = %.10g): level %zu must come along "
                         "with level %zu",
                         w->E[L], x + 1, L + 1);
  }
  return LVS_OK;
}

static int krylov_path(lvs_effective *e, ework *w) {
  lvs_ctx *ctx = w->ctx;
  size_t n = w->n, d = w->d, dd = d * d, m = 0;
  int K = w->K, st;
  double glo, ghi;
  lvsi_gershgorin(w->hp, &glo, &ghi);
  double dtol = 1e-10 * fmax(ghi - glo, fmax(fabs(glo), fabs(ghi)));
  group_levels(e, w, e->levels, 0);
  const size_t *p = e->levels;
  cplx *Pall = NULL, *P = NULL, *y = NULL, **om = NULL;
  lvsi_resolvent **R = NULL;
  if ((st = lvsi_lowest_levels(w->hp, p[d - 1], dtol, w->E, &Pall, &m))) return st;
  if ((st = krylov_cut(w, p, m, dtol))) goto done;
  P = lvsi_malloc(ctx, n * d * sizeof(cplx));
  y = lvsi_malloc(ctx, n * sizeof(cplx));
  om = lvsi_calloc(ctx, (size_t)K + 1, sizeof *om);
  R = lvsi_calloc(ctx, d, sizeof *R);
  if (!P || !y || !om || !R) {
    st = oom(ctx);
    goto done;
  }
  for (size_t a = 0; a < d; a++) memcpy(P + a * n, Pall + p[a] * n, n * sizeof(cplx));
  lvsi_free(ctx, Pall);
  Pall = NULL;
  om[0] = P;
  /* coupling and |V| for the warnings: |Q V p_a| (a bound on the coupling
   * to any one level outside) and the largest stored entry of V */
  size_t vw = w->vp->cplx ? 2 : 1, vc = w->vp->sparse ? w->vp->nnz : n * n;
  for (size_t k = 0; k < vc * vw; k++) w->vmax = fmax(w->vmax, fabs(w->vp->a[k]));
  for (size_t a = 0; a < d; a++) {
    if ((st = lvs_matrix_apply(w->vp, 1, (const double *)(P + a * n), (double *)y))) goto done;
    for (size_t b = 0; b < d; b++) {
      cplx c = 0;
      for (size_t i = 0; i < n; i++) c += conj(P[i + b * n]) * y[i];
      for (size_t i = 0; i < n; i++) y[i] -= c * P[i + b * n];
    }
    double nr = 0;
    for (size_t i = 0; i < n; i++) nr += creal(y[i] * conj(y[i]));
    w->coup = fmax(w->coup, sqrt(nr));
  }
  if ((st = gap_warning(e, w))) goto done;
  /* one resolvent per distinct member energy */
  for (size_t a = 0; a < d && K > 1; a++) {
    for (size_t b = 0; b < a && !R[a]; b++)
      if (fabs(w->E[p[a]] - w->E[p[b]]) <= dtol) R[a] = R[b];
    if (!R[a] && (st = lvsi_resolvent_new(w->hp, P, d, w->E[p[a]], 1, &R[a]))) goto done;
  }
  for (int k = 1; k <= K; k++) {
    if ((st = lvsi_fence(ctx, "effective"))) goto done;
    cplx *Wk = w->W + (size_t)k * dd;
    int keep = k < K; /* Omega(K) is not needed for H to order K */
    if (keep && !(om[k] = lvsi_malloc(ctx, n * d * sizeof(cplx)))) {
      st = oom(ctx);
      goto done;
    }
    for (size_t a = 0; a < d; a++) {
      if ((st = lvs_matrix_apply(w->vp, 1, (const double *)(om[k - 1] + a * n), (double *)y))) goto done;
      for (size_t b = 0; b < d; b++) {
        cplx c = 0;
        for (size_t i = 0; i < n; i++) c += conj(P[i + b * n]) * y[i];
        Wk[b + a * d] = c;
      }
      if (!keep) continue;
      for (int i = 1; i < k; i++) {
        const cplx *oi = om[i], *wj = w->W + (size_t)(k - i) * dd;
        for (size_t b = 0; b < d; b++) {
          cplx c = wj[b + a * d];
          if (c != 0)
            for (size_t r = 0; r < n; r++) y[r] -= oi[r + b * n] * c;
        }
      }
      if ((st = lvsi_resolvent_solve(R[a], y, om[k] + a * n))) goto done;
    }
  }
  /* X(k) = sum_{i+j=k, i,j>=1} Omega(i)^dag Omega(j) */
  for (int k = 2; k <= K; k++) {
    cplx *xk = w->X + (size_t)k * dd;
    for (int i = 1; i <= k - 1; i++) overlap_acc(d, n, om[i], n, om[k - i], n, xk);
  }
done:
  if (R)
    for (size_t a = 0; a < d; a++) {
      int shared = 0;
      for (size_t b = 0; b < a; b++) shared |= R[b] == R[a];
      if (!shared) lvsi_resolvent_free(R[a]);
    }
  if (om)
    for (int k = 0; k <= K; k++) lvsi_free(ctx, om[k]);
  else
    lvsi_free(ctx, P);
  lvsi_free(ctx, om);
  lvsi_free(ctx, R);
  lvsi_free(ctx, y);
  lvsi_free(ctx, Pall);
  return st;
}

/* ---- phase 3b: wave-operator recursion, sparse path (diagonal H0) ------ */
/* With H0 diagonal the basis states are the levels and V is used as given
 * (plain, sparse or dense), column by column. Omega(k) is nonzero only on
 * the states reached from the group by at most k applications of V; those
 * are numbered in order of discovery (rows[]), so Omega(k) is a dense
 * r[k] x d block on the prefix rows[0 .. r[k]) and the prefixes grow with
 * k (the same idea as series.c's per-order row ranges, with an explicit
 * reached set instead of a range, so V need not be banded in any order of
 * the basis). Order k reads the stored entries of V in the r[k-1] columns
 * of the prefix once: time O(K (nnz reached) d + K^2 r d^2), memory
 * O(K r d) plus one n-entry index (slot), never n x n. */
typedef struct {
  size_t *rows, nr, cap; /* reached states outside the group, in order of discovery */
  ptrdiff_t *slot;       /* n: 0 unseen, r + 1 for rows[r], -(a + 1) for group member a */
} reach;

/* register every state reached from columns c0 .. c1-1 of the list: ext
 * when given, else rows[] itself (re-read after each growth of rows[]) */
static int discover(lvs_ctx *ctx, const lvs_matrix *V, reach *R, const size_t *ext, size_t c0, size_t c1) {
  for (size_t c = c0; c < c1; c++) {
    size_t j = ext ? ext[c] : R->rows[c], k0, k1;
    col_span(V, j, &k0, &k1);
    for (size_t k = k0; k < k1; k++) {
      size_t s = ent_row(V, j, k);
      if (R->slot[s] || ent_val(V, k) == 0) continue;
      if (R->nr == R->cap) {
        size_t cap = R->cap ? 2 * R->cap : 64;
        size_t *nrow = lvsi_malloc(ctx, cap * sizeof *nrow);
        if (!nrow) return oom(ctx);
        if (R->nr) memcpy(nrow, R->rows, R->nr * sizeof *nrow);
        lvsi_free(ctx, R->rows);
        R->rows = nrow, R->cap = cap;
      }
      R->rows[R->nr++] = s;
      R->slot[s] = (ptrdiff_t)R->nr;
    }
  }
  return LVS_OK;
}

/* y = V x for x on the prefix rows[0 .. rp) (x is rp x d, or the identity
 * on the group when prev is NULL): group rows go to Wk (d x d), reached rows
 * below rk to ok (rk x d, ok may be NULL: last order) */
static void apply_v(const lvs_matrix *V, const reach *R, const size_t *gstate, size_t d, const cplx *prev,
                    size_t rp, cplx *Wk, cplx *ok, size_t rk) {
  size_t nc = prev ? rp : d;
  for (size_t c = 0; c < nc; c++) {
    size_t j = prev ? R->rows[c] : gstate[c], k0, k1;
    col_span(V, j, &k0, &k1);
    for (size_t k = k0; k < k1; k++) {
      ptrdiff_t sl = R->slot[ent_row(V, j, k)];
      if (sl == 0 || (sl > 0 && (!ok || (size_t)sl > rk))) continue;
      cplx val = ent_val(V, k);
      if (val == 0) continue;
      cplx *dst = sl < 0 ? Wk + (size_t)(-sl - 1) : ok + (size_t)(sl - 1);
      size_t ld = sl < 0 ? d : rk;
      if (!prev) {
        dst[c * ld] += val; /* column c of the identity: member c */
      } else {
        for (size_t a = 0; a < d; a++) dst[a * ld] += val * prev[c + a * rp];
      }
    }
  }
}

static int sparse_path(lvs_effective *e, ework *w) {
  lvs_ctx *ctx = w->ctx;
  const lvs_matrix *V = w->vp;
  size_t n = w->n, d = w->d, dd = d * d;
  int K = w->K, st = LVS_OK;
  reach R = {0};
  size_t *r = lvsi_calloc(ctx, (size_t)K + 1, sizeof *r);
  cplx **om = lvsi_calloc(ctx, (size_t)K + 1, sizeof *om);
  double *Ea = lvsi_malloc(ctx, d * sizeof *Ea);
  R.slot = lvsi_calloc(ctx, n, sizeof *R.slot);
  if (!r || !om || !Ea || !R.slot) {
    st = oom(ctx);
    goto done;
  }
  group_levels(e, w, e->levels, 1);
  const size_t *gs = e->states;
  for (size_t a = 0; a < d; a++) {
    R.slot[gs[a]] = -(ptrdiff_t)(a + 1);
    Ea[a] = w->E[e->levels[a]];
  }
  if ((st = check_cut(e, w))) goto done;
  /* coupling out of the group and the largest entry, from stored entries */
  for (size_t a = 0; a < d; a++) {
    size_t k0, k1;
    col_span(V, gs[a], &k0, &k1);
    for (size_t k = k0; k < k1; k++)
      if (R.slot[ent_row(V, gs[a], k)] >= 0) w->coup = fmax(w->coup, cabs(ent_val(V, k)));
  }
  size_t cnt = V->sparse ? V->nnz : n * n;
  for (size_t k = 0; k < cnt; k++) w->vmax = fmax(w->vmax, cabs(ent_val(V, k)));
  if ((st = gap_warning(e, w))) goto done;

  for (int k = 1; k <= K; k++) {
    if ((st = lvsi_fence(ctx, "effective"))) goto done;
    cplx *Wk = w->W + (size_t)k * dd;
    const cplx *prev = k > 1 ? om[k - 1] : NULL;
    size_t rp = r[k - 1];
    if (k == K) { /* Omega(K) is not needed for H to order K: group rows only */
      apply_v(V, &R, gs, d, prev, rp, Wk, NULL, 0);
      break;
    }
    /* new columns of Omega(k-1): the group (k = 1), else rows[r[k-2] .. r[k-1]) */
    st = k == 1 ? discover(ctx, V, &R, gs, 0, d) : discover(ctx, V, &R, NULL, r[k - 2], rp);
    if (st) goto done;
    size_t rk = r[k] = R.nr;
    cplx *ok = om[k] = lvsi_calloc(ctx, rk * d + 1, sizeof(cplx));
    if (!ok) {
      st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in effective (%zu states reached at order %d)", rk, k);
      goto done;
    }
    apply_v(V, &R, gs, d, prev, rp, Wk, ok, rk);
    /* Omega(k) = [V Omega(k-1) - sum_i Omega(i) W(k-i)] / (E_a - E_m) */
    for (int i = 1; i <= k - 1; i++) {
      const cplx *oi = om[i], *wj = w->W + (size_t)(k - i) * dd;
      size_t ri = r[i];
      for (size_t a = 0; a < d; a++)
        for (size_t b = 0; b < d; b++) {
          cplx c = wj[b + a * d];
          if (c == 0) continue;
          for (size_t m = 0; m < ri; m++) ok[m + a * rk] -= oi[m + b * ri] * c;
        }
    }
    for (size_t a = 0; a < d; a++)
      for (size_t m = 0; m < rk; m++) ok[m + a * rk] /= Ea[a] - w->Es[R.rows[m]];
  }
  /* X(k) = sum_{i+j=k, i,j>=1} Omega(i)^dag Omega(j), on the common prefix */
  for (int k = 2; k <= K; k++) {
    cplx *xk = w->X + (size_t)k * dd;
    for (int i = 1; i <= k - 1; i++) {
      int j = k - i;
      size_t ri = r[i], rj = r[j];
      overlap_acc(d, ri < rj ? ri : rj, om[i], ri, om[j], rj, xk);
    }
  }
done:
  if (om)
    for (int k = 0; k <= K; k++) lvsi_free(ctx, om[k]);
  lvsi_free(ctx, om), lvsi_free(ctx, r), lvsi_free(ctx, Ea);
  lvsi_free(ctx, R.rows), lvsi_free(ctx, R.slot);
  return st;
}

/* ---- phase 4: des Cloizeaux symmetrization ----------------------------- */
/* e->terms = N^{1/2} H_Bloch N^{-1/2}, N = 1 + X, every product truncated
 * at order K; H_Bloch = diag(E_a) + sum_k W(k) */
static int symmetrize(lvs_effective *e, ework *w) {
  lvs_ctx *ctx = w->ctx;
  size_t d = w->d, dd = d * d;
  int K = w->K;
  size_t sz = (size_t)(K + 1) * dd;
  cplx *buf = lvsi_calloc(ctx, 6 * sz, sizeof(cplx));
  if (!buf) return oom(ctx);
  cplx *HB = buf, *Xp = buf + sz, *Xn = buf + 2 * sz, *Sp = buf + 3 * sz, *Sm = buf + 4 * sz, *T1 = buf + 5 * sz;
  const cplx *X = w->X;
  for (size_t a = 0; a < d; a++) HB[a + a * d] = w->E[e->levels[a]];
  memcpy(HB + dd, w->W + dd, (size_t)K * dd * sizeof(cplx));
  /* (1+X)^{+-1/2}: Xp holds X^j; binomial coefficients by recurrence */
  for (size_t a = 0; a < d; a++) Sp[a + a * d] = Sm[a + a * d] = 1.0;
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
  lvsi_free(ctx, buf);
  return LVS_OK;
}

/* ---- phase 5: result assembly ------------------------------------------ */
/* each term must come out Hermitian up to rounding (internal check, a
 * warning when not); remove the rounding; decide real or complex */
static int assemble(lvs_effective *e, ework *w) {
  int K = w->K, st;
  size_t d = w->d, sz = (size_t)(K + 1) * d * d;
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
    if ((st = addwarn(e, buf))) return st;
  }
  e->complex_result = 0;
  for (size_t i = 0; i < sz; i++)
    if (cimag(e->terms[i]) != 0.0) {
      double re = fabs(creal(e->terms[i]));
      if (fabs(cimag(e->terms[i])) > 1e-14 * (re > w->vmax ? re : w->vmax)) e->complex_result = 1;
    }
  if (!e->warn && (st = addwarn(e, ""))) return st;
  if (e->warn[0] == '\n') memmove(e->warn, e->warn + 1, strlen(e->warn));
  return LVS_OK;
}

int lvs_effective_new_ex(const lvs_matrix *h0, const lvs_matrix *v, const size_t *levels, size_t nlevels, int order,
                         unsigned flags, lvs_effective **out) {
  lvs_ctx *ctx = h0->ctx;
  *out = NULL;
  ework w;
  memset(&w, 0, sizeof w);
  w.ctx = ctx;
  lvs_effective *e = NULL;
  int st = check_args(&w, h0, v, levels, nlevels, order);
  if (st) goto fail;
  size_t n = w.n, d = w.d, dd = d * d;
  int K = w.K;
  e = lvsi_calloc(ctx, 1, sizeof *e);
  if (!e) {
    st = oom(ctx);
    goto fail;
  }
  e->ctx = ctx;
  e->n = n;
  e->d = d;
  e->order = K;
  e->levels = lvsi_malloc(ctx, d * sizeof(size_t));
  e->states = lvsi_malloc(ctx, d * sizeof(size_t));
  e->terms = lvsi_calloc(ctx, (size_t)(K + 1) * dd, sizeof(cplx));
  w.Es = lvsi_malloc(ctx, n * sizeof(double));
  w.E = lvsi_malloc(ctx, n * sizeof(double));
  w.perm = lvsi_malloc(ctx, n * sizeof(size_t));
  w.inP = lvsi_calloc(ctx, n, 1);
  w.W = lvsi_calloc(ctx, (size_t)(K + 1) * dd, sizeof(cplx));
  w.X = lvsi_calloc(ctx, (size_t)(K + 1) * dd, sizeof(cplx));
  if (!e->levels || !e->states || !e->terms || !w.Es || !w.E || !w.perm || !w.inP || !w.W || !w.X) {
    st = oom(ctx);
    goto fail;
  }
  memcpy(e->levels, levels, d * sizeof(size_t)); /* sorted by group_levels */
  /* H0's spectrum and basis: a diagonal H0 keeps its basis states */
  int diag = plain_diagonal(&w);
  if (diag && (st = sort_states(&w))) goto fail;
  /* the recursion fills W and X */
  if (diag && !(flags & LVS_EFFECTIVE_DENSE))
    st = sparse_path(e, &w);
  else if (!diag && !(flags & LVS_EFFECTIVE_DENSE) && krylov_applies(&w, levels))
    st = krylov_path(e, &w);
  else
    st = dense_path(e, &w, h0, v, diag);
  if (st || (st = symmetrize(e, &w)) || (st = assemble(e, &w))) goto fail;
  ework_free(&w);
  *out = e;
  return LVS_OK;
fail:
  ework_free(&w);
  lvs_effective_free(e);
  return st;
}

int lvs_effective_new(const lvs_matrix *h0, const lvs_matrix *v, const size_t *levels, size_t nlevels, int order,
                      lvs_effective **out) {
  return lvs_effective_new_ex(h0, v, levels, nlevels, order, 0, out);
}

/* All n eigenvalues of H0, ascending (the binding's window). A diagonal H0
 * is sorted (O(n log runs), no eigensolver: lvs_eigen would treat each of
 * its n states as a symmetry sector); anything else goes to lvs_eigen. */
int lvs_effective_spectrum(const lvs_matrix *h0, double *w) {
  lvs_ctx *ctx = h0->ctx;
  ework wk;
  memset(&wk, 0, sizeof wk);
  wk.ctx = ctx;
  size_t n = wk.n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0)) return lvsi_fail(ctx, LVS_EDIM, "H0 must be square, got %zux%zu", n, lvs_matrix_cols(h0));
  int st = h0->vis ? lvs_matrix_visible(h0, 0, &wk.hown) : LVS_OK;
  wk.hp = h0->vis ? wk.hown : h0;
  if (!st) st = lvsi_check_hermitian(wk.hp, LVS_DEFAULT_HERM_TOL, "matrix");
  if (!st) {
    wk.Es = lvsi_malloc(ctx, (n ? n : 1) * sizeof(double));
    wk.perm = lvsi_malloc(ctx, (n ? n : 1) * sizeof(size_t));
    if (!wk.Es || !wk.perm) st = oom(ctx);
  }
  if (!st) {
    if (plain_diagonal(&wk)) {
      wk.E = w; /* borrowed */
      st = sort_states(&wk);
      wk.E = NULL;
    } else {
      st = lvs_eigen(h0, 0, 0, w, NULL);
    }
  }
  ework_free(&wk);
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
void lvs_effective_gap(const lvs_effective *e, double *gap, double *coupling) {
  if (gap) *gap = e->gap;
  if (coupling) *coupling = e->coup;
}

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
