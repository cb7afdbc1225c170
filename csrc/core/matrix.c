/* matrix.c -- operators: dense column-major or sparse (CSC), real or
 * complex, with padding bookkeeping for truncated bases.
 *
 * Padding. A truncated basis (oscillator, N states) hands out operators
 * stored on N + pad states; the visible block is the first N (for products
 * of bases, the states whose every site index is visible). A product of
 * padded operators is exact inside the visible block as long as the sum over
 * intermediate states never needs a state beyond the stored ones. We track
 * it with two numbers per operator: band b (the true operator connects
 * stored indices at most b apart) and slack s (every stored element between
 * indices below N + s is exact). For C = A B,
 *     s_C = min(s_A, s_B) - min(b_A, b_B),  b_C = b_A + b_B,
 * and C is refused when s_C < 0 (its edge would be wrong). Sums keep the
 * smaller slack and the larger band. Plain matrices given by the user are
 * exact by definition (slack infinite). Source for the truncation rule:
 * common practice (an entry (m, n) of x^k is wrong exactly when
 * (m + n + k)/2 exceeds the highest kept level).
 */
#include <cblas.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

#define SP_DENSIFY_FILL 0.25 /* a sparse result fuller than this goes dense */

static int cmp_size(const void *x, const void *y);
static size_t elem(int cplx) { return cplx ? 2 * sizeof(double) : sizeof(double); }

int lvsi_mat_alloc(lvs_ctx *ctx, size_t rows, size_t cols, int cplx, int sparse,
                   size_t nnzcap, lvs_matrix **out) {
  *out = NULL;
  if (!sparse) {
    int st = lvsi_dense_ok(ctx, rows, cols, elem(cplx), "matrix");
    if (st) return st;
  }
  lvs_matrix *m = lvsi_calloc(ctx, 1, sizeof *m);
  if (!m) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory allocating a matrix");
  m->ctx = ctx;
  m->rows = rows;
  m->cols = cols;
  m->n = rows;
  m->cplx = cplx ? 1 : 0;
  m->sparse = sparse ? 1 : 0;
  m->slack = LVS_INF_SLACK;
  m->band = (long)(rows > cols ? rows : cols);
  if (!sparse) {
    size_t cnt = rows * cols * (cplx ? 2 : 1);
    m->a = lvsi_calloc(ctx, cnt ? cnt : 1, sizeof(double));
    if (!m->a) {
      lvsi_free(ctx, m);
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory allocating a %zux%zu matrix", rows, cols);
    }
  } else {
    if (rows > LVSI_SPARSE_MAX_DIM) {
      lvsi_free(ctx, m);
      return lvsi_fail(ctx, LVS_ECAP, "a sparse matrix of %zu rows is above the limit of %zu (32-bit row indices)",
                       rows, LVSI_SPARSE_MAX_DIM);
    }
    m->cp = lvsi_calloc(ctx, cols + 1, sizeof(size_t));
    if (!m->cp || lvsi_mat_reserve(m, nnzcap ? nnzcap : 4)) {
      lvs_matrix_free(m);
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory allocating a sparse %zux%zu matrix", rows,
                       cols);
    }
  }
  *out = m;
  return LVS_OK;
}

int lvsi_mat_reserve(lvs_matrix *m, size_t cap) {
  if (cap <= m->cap) return LVS_OK;
  lvs_ctx *ctx = m->ctx;
  uint32_t *ri = lvsi_malloc(ctx, cap * sizeof *ri);
  double *a = lvsi_malloc(ctx, cap * elem(m->cplx));
  if (!ri || !a) {
    lvsi_free(ctx, ri);
    lvsi_free(ctx, a);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory growing a sparse matrix");
  }
  if (m->nnz) {
    memcpy(ri, m->ri, m->nnz * sizeof *ri);
    memcpy(a, m->a, m->nnz * elem(m->cplx));
  }
  lvsi_free(ctx, m->ri);
  lvsi_free(ctx, m->a);
  m->ri = ri;
  m->a = a;
  m->cap = cap;
  return LVS_OK;
}

int lvsi_csc_push(lvs_matrix *m, size_t row, double complex v) {
  if (m->nnz == m->cap) {
    int st = lvsi_mat_reserve(m, m->cap * 2 + 16);
    if (st) return st;
  }
  m->ri[m->nnz] = row;
  if (m->cplx) {
    m->a[2 * m->nnz] = creal(v);
    m->a[2 * m->nnz + 1] = cimag(v);
  } else {
    m->a[m->nnz] = creal(v);
  }
  m->nnz++;
  return LVS_OK;
}

int lvsi_set_vis(lvs_matrix *m, size_t n, const size_t *vis) {
  lvsi_free(m->ctx, m->vis);
  m->vis = NULL;
  m->n = m->rows;
  if (!vis) return LVS_OK;
  m->vis = lvsi_malloc(m->ctx, (n ? n : 1) * sizeof(size_t));
  if (!m->vis) return lvsi_fail(m->ctx, LVS_ENOMEM, "out of memory");
  memcpy(m->vis, vis, n * sizeof(size_t));
  m->n = n;
  return LVS_OK;
}

int lvs_matrix_new(lvs_ctx *ctx, size_t rows, size_t cols, int cplx, lvs_matrix **out) {
  if (rows == 0 || cols == 0) {
    *out = NULL;
    return lvsi_fail(ctx, LVS_EINVAL, "matrix size must be positive, got %zux%zu", rows, cols);
  }
  return lvsi_mat_alloc(ctx, rows, cols, cplx, 0, 0, out);
}

int lvs_matrix_new_sparse(lvs_ctx *ctx, size_t rows, size_t cols, int cplx, lvs_matrix **out) {
  if (rows == 0 || cols == 0) {
    *out = NULL;
    return lvsi_fail(ctx, LVS_EINVAL, "matrix size must be positive, got %zux%zu", rows, cols);
  }
  return lvsi_mat_alloc(ctx, rows, cols, cplx, 1, 4, out);
}

void lvs_matrix_free(lvs_matrix *m) {
  if (!m) return;
  lvs_ctx *ctx = m->ctx;
  lvsi_free(ctx, m->a);
  lvsi_free(ctx, m->cp);
  lvsi_free(ctx, m->ri);
  lvsi_free(ctx, m->vis);
  lvsi_free(ctx, m);
}

size_t lvs_matrix_rows(const lvs_matrix *m) { return m->vis ? m->n : m->rows; }
size_t lvs_matrix_cols(const lvs_matrix *m) { return m->vis ? m->n : m->cols; }
int lvs_matrix_is_complex(const lvs_matrix *m) { return m->cplx; }
int lvs_matrix_is_sparse(const lvs_matrix *m) { return m->sparse; }
size_t lvs_matrix_nnz(const lvs_matrix *m) {
  return m->sparse ? m->nnz : m->rows * m->cols;
}

static double complex sval(const lvs_matrix *m, size_t k) {
  return m->cplx ? CMPLX(m->a[2 * k], m->a[2 * k + 1]) : m->a[k];
}

/* position of stored (i, j) in a sparse matrix, or SIZE_MAX */
static size_t sp_find(const lvs_matrix *m, size_t i, size_t j) {
  size_t lo = m->cp[j], hi = m->cp[j + 1];
  while (lo < hi) {
    size_t mid = lo + (hi - lo) / 2;
    if (m->ri[mid] < i)
      lo = mid + 1;
    else
      hi = mid;
  }
  return (lo < m->cp[j + 1] && m->ri[lo] == i) ? lo : SIZE_MAX;
}

double complex lvsi_mat_at(const lvs_matrix *m, size_t i, size_t j) {
  if (!m->sparse) {
    size_t k = i + j * m->rows;
    return m->cplx ? CMPLX(m->a[2 * k], m->a[2 * k + 1]) : m->a[k];
  }
  size_t k = sp_find(m, i, j);
  return k == SIZE_MAX ? 0.0 : sval(m, k);
}

static size_t vmap(const lvs_matrix *m, size_t i) { return m->vis ? m->vis[i] : i; }

int lvs_matrix_get(const lvs_matrix *m, size_t i, size_t j, double *re, double *im) {
  if (i >= lvs_matrix_rows(m) || j >= lvs_matrix_cols(m))
    return lvsi_fail(m->ctx, LVS_ERANGE, "index (%zu, %zu) out of range for a %zux%zu matrix",
                     i + 1, j + 1, lvs_matrix_rows(m), lvs_matrix_cols(m));
  double complex v = lvsi_mat_at(m, vmap(m, i), vmap(m, j));
  *re = creal(v);
  *im = cimag(v);
  return LVS_OK;
}

static int promote_complex(lvs_matrix *m) {
  if (m->cplx) return LVS_OK;
  size_t cnt = m->sparse ? m->cap : m->rows * m->cols;
  if (!m->sparse) {
    int st = lvsi_dense_ok(m->ctx, m->rows, m->cols, 2 * sizeof(double), "matrix");
    if (st) return st;
  }
  double *a = lvsi_calloc(m->ctx, cnt ? 2 * cnt : 2, sizeof(double));
  if (!a) return lvsi_fail(m->ctx, LVS_ENOMEM, "out of memory");
  size_t used = m->sparse ? m->nnz : cnt;
  for (size_t k = 0; k < used; k++) a[2 * k] = m->a[k];
  lvsi_free(m->ctx, m->a);
  m->a = a;
  m->cplx = 1;
  return LVS_OK;
}

static int mat_set_stored(lvs_matrix *m, size_t i, size_t j, double re, double im) {
  if (im != 0.0 && !m->cplx) {
    int st = promote_complex(m);
    if (st) return st;
  }
  if (!m->sparse) {
    size_t k = i + j * m->rows;
    if (m->cplx) {
      m->a[2 * k] = re;
      m->a[2 * k + 1] = im;
    } else {
      m->a[k] = re;
    }
    return LVS_OK;
  }
  size_t k = sp_find(m, i, j);
  if (k == SIZE_MAX) {
    if (re == 0.0 && im == 0.0) return LVS_OK;
    if (m->nnz == m->cap) {
      int st = lvsi_mat_reserve(m, m->cap * 2 + 16);
      if (st) return st;
    }
    /* insert keeping rows sorted */
    size_t pos = m->cp[j];
    while (pos < m->cp[j + 1] && m->ri[pos] < i) pos++;
    size_t e = m->cplx ? 2 : 1;
    memmove(m->ri + pos + 1, m->ri + pos, (m->nnz - pos) * sizeof *m->ri);
    memmove(m->a + e * (pos + 1), m->a + e * pos, (m->nnz - pos) * e * sizeof(double));
    m->ri[pos] = i;
    for (size_t c = j + 1; c <= m->cols; c++) m->cp[c]++;
    m->nnz++;
    k = pos;
  }
  if (m->cplx) {
    m->a[2 * k] = re;
    m->a[2 * k + 1] = im;
  } else {
    m->a[k] = re;
  }
  return LVS_OK;
}

int lvs_matrix_set(lvs_matrix *m, size_t i, size_t j, double re, double im) {
  if (i >= lvs_matrix_rows(m) || j >= lvs_matrix_cols(m))
    return lvsi_fail(m->ctx, LVS_ERANGE, "index (%zu, %zu) out of range for a %zux%zu matrix",
                     i + 1, j + 1, lvs_matrix_rows(m), lvs_matrix_cols(m));
  if (!isfinite(re) || !isfinite(im))
    return lvsi_fail(m->ctx, LVS_EINVAL, "entry (%zu, %zu) is not finite", i + 1, j + 1);
  /* a user-set element makes the padded edge no longer a true operator */
  return mat_set_stored(m, vmap(m, i), vmap(m, j), re, im);
}

int lvs_matrix_copy(const lvs_matrix *a, lvs_matrix **out) {
  lvs_matrix *c;
  int st = lvsi_mat_alloc(a->ctx, a->rows, a->cols, a->cplx, a->sparse, a->sparse ? a->nnz : 0, &c);
  if (st) return st;
  if (a->sparse) {
    memcpy(c->cp, a->cp, (a->cols + 1) * sizeof(size_t));
    memcpy(c->ri, a->ri, a->nnz * sizeof *c->ri);
    memcpy(c->a, a->a, a->nnz * elem(a->cplx));
    c->nnz = a->nnz;
  } else {
    memcpy(c->a, a->a, a->rows * a->cols * elem(a->cplx));
  }
  c->slack = a->slack;
  c->band = a->band;
  if (a->vis && lvsi_set_vis(c, a->n, a->vis)) {
    lvs_matrix_free(c);
    return LVS_ENOMEM;
  }
  *out = c;
  return LVS_OK;
}

int lvsi_to_dense(const lvs_matrix *a, lvs_matrix **out) {
  if (!a->sparse) return lvs_matrix_copy(a, out);
  lvs_matrix *c;
  int st = lvsi_mat_alloc(a->ctx, a->rows, a->cols, a->cplx, 0, 0, &c);
  if (st) return st;
  for (size_t j = 0; j < a->cols; j++)
    for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) {
      size_t p = a->ri[k] + j * a->rows;
      if (a->cplx) {
        c->a[2 * p] = a->a[2 * k];
        c->a[2 * p + 1] = a->a[2 * k + 1];
      } else {
        c->a[p] = a->a[k];
      }
    }
  c->slack = a->slack;
  c->band = a->band;
  if (a->vis && lvsi_set_vis(c, a->n, a->vis)) {
    lvs_matrix_free(c);
    return LVS_ENOMEM;
  }
  *out = c;
  return LVS_OK;
}

/* Sparse results that filled in go dense (when the cap allows). */
int lvsi_mat_compact(lvs_matrix *m) {
  if (!m->sparse) return LVS_OK;
  double total = (double)m->rows * (double)m->cols;
  if ((double)m->nnz <= SP_DENSIFY_FILL * total) return LVS_OK;
  if (lvsi_dense_ok(m->ctx, m->rows, m->cols, elem(m->cplx), "matrix")) {
    lvs_clear_error(m->ctx);
    return LVS_OK; /* stays sparse */
  }
  lvs_matrix *d;
  int st = lvsi_to_dense(m, &d);
  if (st) return st;
  /* swap contents */
  lvs_matrix tmp = *m;
  *m = *d;
  *d = tmp;
  lvs_matrix_free(d);
  return LVS_OK;
}

/* ---- making two operands compatible ----------------------------------- */

static int same_vis(const lvs_matrix *a, const lvs_matrix *b) {
  if (!a->vis || !b->vis) return a->vis == b->vis;
  return a->n == b->n && a->rows == b->rows &&
         memcmp(a->vis, b->vis, a->n * sizeof(size_t)) == 0;
}

/* Embed plain q (n x n) into the padded space of p (zeros outside), in q's
 * storage: a dense q stays dense (products of dense operators stay on
 * BLAS; a dense q embedded as sparse made Q^T (H Q) with a padded H take
 * 1 s at n = 800 instead of 20 ms); a sparse q copies its stored entries
 * (vis is ascending, so rows stay sorted). */
static int embed_like(const lvs_matrix *p, const lvs_matrix *q, lvs_matrix **out) {
  lvs_matrix *c;
  int st = lvsi_mat_alloc(p->ctx, p->rows, p->cols, q->cplx, q->sparse, q->sparse ? q->nnz : 0, &c);
  if (st) return st;
  if (!q->sparse) {
    size_t w = q->cplx ? 2 : 1;
    for (size_t j = 0; j < q->cols; j++)
      for (size_t i = 0; i < q->rows; i++)
        memcpy(c->a + w * (p->vis[i] + p->vis[j] * p->rows), q->a + w * (i + j * q->rows),
               w * sizeof(double));
  } else {
    size_t qj = 0; /* columns of q map to ascending stored columns vis[j] */
    for (size_t j = 0; j < p->cols; j++) {
      c->cp[j] = c->nnz;
      if (qj < q->cols && p->vis[qj] == j) {
        for (size_t k = q->cp[qj]; k < q->cp[qj + 1]; k++) {
          double complex v = sval(q, k);
          if (v != 0.0 && (st = lvsi_csc_push(c, p->vis[q->ri[k]], v))) goto fail;
        }
        qj++;
      }
    }
    c->cp[p->cols] = c->nnz;
  }
  c->slack = LVS_INF_SLACK;
  c->band = (long)p->rows;
  if ((st = lvsi_set_vis(c, p->n, p->vis))) goto fail;
  *out = c;
  return LVS_OK;
fail:
  lvs_matrix_free(c);
  return st;
}

/* Bring a, b to one storage space; *ta, *tb are owned temporaries or NULL. */
static int coerce(const lvs_matrix *a, const lvs_matrix *b, const lvs_matrix **ra,
                  const lvs_matrix **rb, lvs_matrix **ta, lvs_matrix **tb, const char *op) {
  *ta = *tb = NULL;
  *ra = a;
  *rb = b;
  if (a->vis && b->vis) {
    if (!same_vis(a, b))
      return lvsi_fail(a->ctx, LVS_EDIM, "%s: operators belong to different bases (%zu vs %zu states)",
                       op, a->n, b->n);
    return LVS_OK;
  }
  if (a->vis && !b->vis && b->rows == a->n && b->cols == a->n) return embed_like(a, b, tb) ? a->ctx->code : (*rb = *tb, LVS_OK);
  if (b->vis && !a->vis && a->rows == b->n && a->cols == b->n) return embed_like(b, a, ta) ? a->ctx->code : (*ra = *ta, LVS_OK);
  return LVS_OK;
}

static long band_sum(long a, long b) { return a + b; }

int lvs_matrix_add(const double alpha[2], const lvs_matrix *a0, const double beta[2],
                   const lvs_matrix *b0, lvs_matrix **out) {
  lvs_ctx *ctx = a0->ctx;
  *out = NULL;
  if (lvs_matrix_rows(a0) != lvs_matrix_rows(b0) || lvs_matrix_cols(a0) != lvs_matrix_cols(b0))
    return lvsi_fail(ctx, LVS_EDIM, "dimension mismatch: %zux%zu vs %zux%zu", lvs_matrix_rows(a0),
                     lvs_matrix_cols(a0), lvs_matrix_rows(b0), lvs_matrix_cols(b0));
  const lvs_matrix *a, *b;
  lvs_matrix *ta, *tb, *c = NULL;
  int st = coerce(a0, b0, &a, &b, &ta, &tb, "add");
  if (st) return st;
  double complex al = CMPLX(alpha[0], alpha[1]), be = CMPLX(beta[0], beta[1]);
  int cplx = a->cplx || b->cplx || alpha[1] != 0.0 || beta[1] != 0.0;
  if (a->sparse && b->sparse) {
    st = lvsi_mat_alloc(ctx, a->rows, a->cols, cplx, 1, a->nnz + b->nnz, &c);
    if (st) goto done;
    for (size_t j = 0; j < a->cols; j++) {
      c->cp[j] = c->nnz;
      size_t p = a->cp[j], q = b->cp[j];
      while (p < a->cp[j + 1] || q < b->cp[j + 1]) {
        size_t ia = p < a->cp[j + 1] ? a->ri[p] : SIZE_MAX;
        size_t ib = q < b->cp[j + 1] ? b->ri[q] : SIZE_MAX;
        double complex v;
        size_t row;
        if (ia == ib) {
          v = al * sval(a, p++) + be * sval(b, q++);
          row = ia;
        } else if (ia < ib) {
          v = al * sval(a, p++);
          row = ia;
        } else {
          v = be * sval(b, q++);
          row = ib;
        }
        if (v == 0.0) continue; /* capacity a->nnz + b->nnz: written in place */
        c->ri[c->nnz] = row;
        if (cplx) {
          c->a[2 * c->nnz] = creal(v);
          c->a[2 * c->nnz + 1] = cimag(v);
        } else {
          c->a[c->nnz] = creal(v);
        }
        c->nnz++;
      }
    }
    c->cp[a->cols] = c->nnz;
  } else {
    st = lvsi_mat_alloc(ctx, a->rows, a->cols, cplx, 0, 0, &c);
    if (st) goto done;
    for (size_t j = 0; j < a->cols; j++)
      for (size_t i = 0; i < a->rows; i++) {
        double complex v = al * lvsi_mat_at(a, i, j) + be * lvsi_mat_at(b, i, j);
        size_t k = i + j * a->rows;
        if (cplx) {
          c->a[2 * k] = creal(v);
          c->a[2 * k + 1] = cimag(v);
        } else {
          c->a[k] = creal(v);
        }
      }
  }
  c->slack = a->slack < b->slack ? a->slack : b->slack;
  c->band = a->band > b->band ? a->band : b->band;
  if (a->vis && (st = lvsi_set_vis(c, a->n, a->vis))) goto done;
  st = lvsi_mat_compact(c);
done:
  lvs_matrix_free(ta);
  lvs_matrix_free(tb);
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

int lvs_matrix_scale(const lvs_matrix *a, const double z[2], lvs_matrix **out) {
  int st = lvs_matrix_copy(a, out);
  if (st) return st;
  lvs_matrix *c = *out;
  if (z[1] != 0.0 && (st = promote_complex(c))) {
    lvs_matrix_free(c);
    *out = NULL;
    return st;
  }
  size_t cnt = c->sparse ? c->nnz : c->rows * c->cols;
  if (c->cplx) {
    double complex zz = CMPLX(z[0], z[1]);
    double complex *v = (double complex *)c->a;
    for (size_t k = 0; k < cnt; k++) v[k] *= zz;
  } else {
    for (size_t k = 0; k < cnt; k++) c->a[k] *= z[0];
  }
  return LVS_OK;
}

/* identity on the storage space of a (square) */
static int identity_like(const lvs_matrix *a, lvs_matrix **out) {
  lvs_matrix *c;
  int st = lvsi_mat_alloc(a->ctx, a->rows, a->cols, 0, 1, a->rows, &c);
  if (st) return st;
  for (size_t j = 0; j < a->cols; j++) {
    c->cp[j] = j;
    c->ri[j] = j;
    c->a[j] = 1.0;
  }
  c->cp[a->cols] = c->nnz = a->cols;
  c->slack = LVS_INF_SLACK;
  c->band = 0;
  if (a->vis && (st = lvsi_set_vis(c, a->n, a->vis))) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

int lvs_matrix_shift(const lvs_matrix *a, const double z[2], lvs_matrix **out) {
  *out = NULL;
  if (lvs_matrix_rows(a) != lvs_matrix_cols(a))
    return lvsi_fail(a->ctx, LVS_EDIM, "adding a number needs a square matrix, got %zux%zu",
                     lvs_matrix_rows(a), lvs_matrix_cols(a));
  lvs_matrix *id;
  int st = identity_like(a, &id);
  if (st) return st;
  double one[2] = {1, 0};
  st = lvs_matrix_add(one, a, z, id, out);
  lvs_matrix_free(id);
  return st;
}

/* ---- sums of many terms (lvs_matrix_sum) --------------------------------
 * One merge instead of one lvs_matrix_add per term: adding terms one by one
 * copies the running total every time (an L-site chain of L terms of size
 * 2^L costs L^2 2^L). Phases: plan (check the terms, find the storage space,
 * the result type, slack and band), then either the sparse merge (count the
 * distinct rows of each column over all terms, allocate the exact capacity,
 * scatter each column into an accumulator and write its sorted rows) or the
 * dense accumulation when a term is dense. The rules are lvs_matrix_add's:
 * a plain term of the visible size joins a padded space by embedding (here
 * mapped on the fly, no embedded copy), exact zeros of the sum are dropped
 * from sparse results, and a full sparse result goes dense. */

typedef struct {
  size_t count;
  const double (*coef)[2];
  const lvs_matrix *const *terms;
  const lvs_matrix *space; /* the first padded term, else the first op */
  size_t *inv;             /* stored -> visible index when plain terms embed */
  int cplx, dense;
  long slack, band;
} sum_plan;

static double complex sum_coef(const sum_plan *p, size_t k) {
  return p->coef ? CMPLX(p->coef[k][0], p->coef[k][1]) : 1.0;
}

/* 1 when op t is a plain term mapped into the padded space */
static int sum_embeds(const sum_plan *p, const lvs_matrix *t) { return p->space->vis && !t->vis; }

static int sum_plan_make(lvs_ctx *ctx, size_t count, const double (*coef)[2],
                         const lvs_matrix *const *terms, sum_plan *p) {
  memset(p, 0, sizeof *p);
  p->count = count;
  p->coef = coef;
  p->terms = terms;
  p->slack = LVS_INF_SLACK;
  if (count == 0) return lvsi_fail(ctx, LVS_EINVAL, "sum: no terms");
  size_t first = 0;
  while (first < count && !terms[first]) first++;
  if (first == count) return lvsi_fail(ctx, LVS_EINVAL, "sum: no term is an operator");
  const lvs_matrix *t0 = terms[first];
  size_t r = lvs_matrix_rows(t0), c = lvs_matrix_cols(t0);
  p->space = t0;
  for (size_t k = 0; k < count; k++) {
    const lvs_matrix *t = terms[k];
    if (coef && (coef[k][1] != 0.0)) p->cplx = 1;
    if (!t) {
      if (r != c)
        return lvsi_fail(ctx, LVS_EDIM, "sum: term %zu is the identity, which needs square terms, got %zux%zu",
                         k + 1, r, c);
      continue;
    }
    if (lvs_matrix_rows(t) != r || lvs_matrix_cols(t) != c)
      return lvsi_fail(ctx, LVS_EDIM, "sum: dimension mismatch: term %zu is %zux%zu, term %zu is %zux%zu",
                       first + 1, r, c, k + 1, lvs_matrix_rows(t), lvs_matrix_cols(t));
    if (t->vis && !p->space->vis) p->space = t;
    if (t->vis && !same_vis(p->space, t))
      return lvsi_fail(ctx, LVS_EDIM, "sum: operators belong to different bases (%zu vs %zu states, term %zu)",
                       p->space->n, t->n, k + 1);
    p->cplx |= t->cplx;
    p->dense |= !t->sparse;
  }
  int plain = 0;
  for (size_t k = 0; k < count; k++) {
    const lvs_matrix *t = terms[k];
    long s = LVS_INF_SLACK, b = 0; /* the identity: exact, diagonal */
    if (t && sum_embeds(p, t)) {
      b = (long)p->space->rows; /* as embed_like */
      plain = 1;
    } else if (t) {
      s = t->slack;
      b = t->band;
    }
    if (s < p->slack) p->slack = s;
    if (b > p->band) p->band = b;
  }
  if (plain && !p->dense) {
    const lvs_matrix *sp = p->space;
    p->inv = lvsi_malloc(ctx, sp->rows * sizeof(size_t));
    if (!p->inv) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory in a sum");
    for (size_t i = 0; i < sp->rows; i++) p->inv[i] = SIZE_MAX;
    for (size_t i = 0; i < sp->n; i++) p->inv[sp->vis[i]] = i;
  }
  return LVS_OK;
}

/* Column chunks. A merge that walks column j through every term reads
 * 3 x count streams at once, more than the hardware prefetch follows (17
 * terms of a spin chain: 60% of the time in stalls), so the merge works on
 * chunks of w columns and inside a chunk reads one term at a time: first
 * the column lengths (off[c + 1] - off[c]: entries of column j0 + c over
 * all terms), then each term's entries appended to their column's segment
 * of e (so a segment is the terms' sorted runs one after another), then
 * each segment sorted by row (lvsi_sort_entries). vals = 0 gathers rows only. */
typedef lvsi_ent sum_ent; /* (internal.h) */

/* entries of term k in stored column j: [*lo, *hi), rows through *map when
 * set (an embedded plain term); the identity (NULL term) has one */
static void sum_run(const sum_plan *p, size_t k, size_t j, size_t *lo, size_t *hi,
                    const size_t **map) {
  const lvs_matrix *t = p->terms[k];
  *map = NULL;
  *lo = 0;
  *hi = 0;
  if (!t) {
    *hi = 1;
    return;
  }
  size_t tj = j;
  if (sum_embeds(p, t)) {
    tj = p->inv[j];
    if (tj == SIZE_MAX) return;
    *map = p->space->vis;
  }
  *lo = t->cp[tj];
  *hi = t->cp[tj + 1];
}

/* off[0..j1-j0]: segment starts of columns j0..j1-1; returns the total */
static size_t sum_chunk_sizes(const sum_plan *p, size_t j0, size_t j1, size_t *off) {
  size_t w = j1 - j0;
  memset(off, 0, (w + 1) * sizeof *off);
  for (size_t k = 0; k < p->count; k++)
    for (size_t c = 0; c < w; c++) {
      size_t lo, hi;
      const size_t *map;
      sum_run(p, k, j0 + c, &lo, &hi, &map);
      off[c + 1] += hi - lo;
    }
  for (size_t c = 0; c < w; c++) off[c + 1] += off[c];
  return off[w];
}

/* insertion sort (work: the entries out of place) */
static void insertion_sort(sum_ent *e, size_t cnt) {
  for (size_t s = 1; s < cnt; s++) {
    sum_ent v = e[s];
    size_t t = s;
    while (t > 0 && e[t - 1].row > v.row) {
      e[t] = e[t - 1];
      t--;
    }
    e[t] = v;
  }
}

/* merge sorted e[0, m) and e[m, cnt) through tmp (stable) */
static void merge_two(sum_ent *e, size_t m, size_t cnt, sum_ent *tmp) {
  size_t p = 0, q = m, o = 0;
  while (p < m && q < cnt) tmp[o++] = e[q].row < e[p].row ? e[q++] : e[p++];
  while (p < m) tmp[o++] = e[p++];
  while (q < cnt) tmp[o++] = e[q++];
  memcpy(e, tmp, cnt * sizeof *e);
}

/* natural merge sort: adjacent runs merged pairwise, pass after pass
 * (O(cnt log runs), stable) */
static void natural_sort(sum_ent *e, size_t cnt, sum_ent *tmp) {
  for (;;) {
    size_t i = 0, runs = 0;
    while (i < cnt) {
      size_t m = i + 1;
      while (m < cnt && e[m - 1].row <= e[m].row) m++;
      if (i == 0 && m == cnt) return; /* one run: sorted */
      size_t h = m;
      if (h < cnt)
        for (h++; h < cnt && e[h - 1].row <= e[h].row; h++) {}
      size_t p = i, q = m, o = i; /* [i, m) and [m, h) into tmp */
      while (p < m && q < h) tmp[o++] = e[q].row < e[p].row ? e[q++] : e[p++];
      while (p < m) tmp[o++] = e[p++];
      while (q < h) tmp[o++] = e[q++];
      runs++;
      i = h;
    }
    memcpy(e, tmp, cnt * sizeof *e);
    if (runs == 1) return;
  }
}

/* Sort a column segment by row. It is the terms' sorted runs one after
 * another, typically a long one (the running total) and short ones (new
 * terms): the first run is set aside, the rest sorted (insertion sort when
 * short, else natural_sort) and the two merged once, so the long run is
 * copied once, not once per merge pass; O(c log runs), stable (equal rows
 * keep the terms' order). qsort here cost 90 ns an entry on the 120-entry
 * columns of an all-to-all spin sum. tmp holds cnt entries. */
void lvsi_sort_entries(sum_ent *e, size_t cnt, sum_ent *tmp) {
  if (cnt <= 32) {
    insertion_sort(e, cnt);
    return;
  }
  size_t m = 1;
  while (m < cnt && e[m - 1].row <= e[m].row) m++;
  if (m == cnt) return;
  if (cnt - m <= 32) insertion_sort(e + m, cnt - m);
  else natural_sort(e + m, cnt - m, tmp);
  if (e[m - 1].row > e[m].row) merge_two(e, m, cnt, tmp);
}

/* fills e for columns j0..j1-1 (off from sum_chunk_sizes; pos: scratch of
 * j1 - j0 cursors) and sorts each segment */
static void sum_chunk_gather(const sum_plan *p, size_t j0, size_t j1, const size_t *off,
                             size_t *pos, sum_ent *e, sum_ent *tmp, int vals) {
  size_t w = j1 - j0;
  memcpy(pos, off, w * sizeof *pos);
  for (size_t k = 0; k < p->count; k++) {
    const lvs_matrix *t = p->terms[k];
    double complex z = vals ? sum_coef(p, k) : 0.0;
    for (size_t c = 0; c < w; c++) {
      size_t lo, hi, j = j0 + c;
      const size_t *map;
      sum_run(p, k, j, &lo, &hi, &map);
      for (size_t q = lo; q < hi; q++) {
        sum_ent *x = &e[pos[c]++];
        x->row = !t ? j : map ? map[t->ri[q]] : t->ri[q];
        if (!vals) continue;
        if (p->cplx) {
          double complex v = z * (!t ? 1.0 : sval(t, q));
          x->re = creal(v);
          x->im = cimag(v);
        } else {
          x->re = creal(z) * (!t ? 1.0 : t->a[q]);
        }
      }
    }
  }
  for (size_t c = 0; c < w; c++) lvsi_sort_entries(e + off[c], off[c + 1] - off[c], tmp);
}

static int sum_sparse(lvs_ctx *ctx, const sum_plan *p, lvs_matrix **out) {
  size_t rows = p->space->rows, cols = p->space->cols;
  lvs_matrix *c = NULL;
  int st = LVS_OK;
  /* chunk width: about 16k gathered entries per chunk on average */
  double entries = 0;
  for (size_t k = 0; k < p->count; k++)
    entries += p->terms[k] ? (double)p->terms[k]->nnz : (double)cols;
  size_t w = entries > 0 ? (size_t)((double)cols * 16384.0 / entries) : cols;
  if (w < 1) w = 1;
  if (w > cols) w = cols;
  size_t *off = lvsi_malloc(ctx, (w + 1) * sizeof *off);
  size_t *pos = lvsi_malloc(ctx, w * sizeof *pos);
  sum_ent *e = NULL, *tmp = NULL;
  if (!off || !pos) goto nomem;
  /* sizes: the largest chunk sizes the buffer */
  size_t longest = 1;
  for (size_t j0 = 0; j0 < cols; j0 += w) {
    size_t len = sum_chunk_sizes(p, j0, j0 + w < cols ? j0 + w : cols, off);
    if (len > longest) longest = len;
  }
  if (!(e = lvsi_malloc(ctx, longest * sizeof *e)) || !(tmp = lvsi_malloc(ctx, longest * sizeof *tmp)))
    goto nomem;
  /* count: distinct rows, an exact capacity (an upper bound instead raised
   * the peak RSS at L = 20 from 1.14 to 1.45 GB: freed, resident heap
   * blocks went to the unused tail) */
  size_t total = 0;
  for (size_t j0 = 0; j0 < cols; j0 += w) {
    size_t j1 = j0 + w < cols ? j0 + w : cols;
    sum_chunk_sizes(p, j0, j1, off);
    sum_chunk_gather(p, j0, j1, off, pos, e, tmp, 0);
    for (size_t cc = 0; cc < j1 - j0; cc++)
      for (size_t s = off[cc]; s < off[cc + 1]; s++) total += s == off[cc] || e[s].row != e[s - 1].row;
  }
  if ((st = lvsi_mat_alloc(ctx, rows, cols, p->cplx, 1, total, &c))) goto done;
  /* fill: duplicates summed, exact zeros dropped */
  size_t nnz = 0;
  for (size_t j0 = 0; j0 < cols; j0 += w) {
    size_t j1 = j0 + w < cols ? j0 + w : cols;
    sum_chunk_sizes(p, j0, j1, off);
    sum_chunk_gather(p, j0, j1, off, pos, e, tmp, 1);
    for (size_t cc = 0; cc < j1 - j0; cc++) {
      c->cp[j0 + cc] = nnz;
      for (size_t s = off[cc]; s < off[cc + 1];) {
        size_t i = e[s].row;
        double re = e[s].re, im = p->cplx ? e[s].im : 0.0;
        for (s++; s < off[cc + 1] && e[s].row == i; s++) {
          re += e[s].re;
          if (p->cplx) im += e[s].im;
        }
        if (re == 0.0 && im == 0.0) continue;
        if (p->cplx) {
          c->a[2 * nnz] = re;
          c->a[2 * nnz + 1] = im;
        } else {
          c->a[nnz] = re;
        }
        c->ri[nnz++] = i;
      }
    }
  }
  c->cp[cols] = c->nnz = nnz;
  goto done;
nomem:
  st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in a sum");
done:
  lvsi_free(ctx, off);
  lvsi_free(ctx, pos);
  lvsi_free(ctx, e);
  lvsi_free(ctx, tmp);
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

static void dense_acc(lvs_matrix *c, size_t idx, double complex v) {
  if (c->cplx) {
    c->a[2 * idx] += creal(v);
    c->a[2 * idx + 1] += cimag(v);
  } else {
    c->a[idx] += creal(v);
  }
}

static int sum_dense(lvs_ctx *ctx, const sum_plan *p, lvs_matrix **out) {
  size_t rows = p->space->rows, cols = p->space->cols;
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, rows, cols, p->cplx, 0, 0, &c);
  if (st) return st;
  for (size_t k = 0; k < p->count; k++) {
    const lvs_matrix *t = p->terms[k];
    double complex z = sum_coef(p, k);
    const size_t *map = t && sum_embeds(p, t) ? p->space->vis : NULL;
    if (!t) {
      for (size_t j = 0; j < cols; j++) dense_acc(c, j + j * rows, z);
    } else if (t->sparse) {
      for (size_t j = 0; j < t->cols; j++)
        for (size_t q = t->cp[j]; q < t->cp[j + 1]; q++) {
          size_t i = map ? map[t->ri[q]] : t->ri[q], sj = map ? map[j] : j;
          dense_acc(c, i + sj * rows, z * sval(t, q));
        }
    } else if (!map && !c->cplx) {
      double zr = creal(z);
      for (size_t idx = 0; idx < rows * cols; idx++) c->a[idx] += zr * t->a[idx];
    } else {
      for (size_t j = 0; j < t->cols; j++)
        for (size_t i = 0; i < t->rows; i++) {
          size_t si = map ? map[i] : i, sj = map ? map[j] : j;
          dense_acc(c, si + sj * rows, z * sval(t, i + j * t->rows));
        }
    }
  }
  *out = c;
  return LVS_OK;
}

int lvs_matrix_sum(lvs_ctx *ctx, size_t count, const double (*coef)[2],
                   const lvs_matrix *const *terms, lvs_matrix **out) {
  *out = NULL;
  sum_plan p;
  int st = sum_plan_make(ctx, count, coef, terms, &p);
  lvs_matrix *c = NULL;
  if (!st) st = p.dense ? sum_dense(ctx, &p, &c) : sum_sparse(ctx, &p, &c);
  lvsi_free(ctx, p.inv);
  if (st) return st;
  c->slack = p.slack;
  c->band = p.band;
  if ((p.space->vis && (st = lvsi_set_vis(c, p.space->n, p.space->vis))) ||
      (st = lvsi_mat_compact(c))) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

/* ---- products ---------------------------------------------------------- */

/* A B when every column of b holds at most one entry (a diagonal, a
 * permutation, a spin-1/2 site operator or a product of such): column j of
 * the product is column k of a times b's entry (k, j), already sorted, so
 * no accumulator, no row sort and an exact capacity. Kron-structured terms
 * of a spin chain (Sx_i Sx_j on 2^L states) took most of their time in the
 * general product's row-sized scratch arrays. */
static int sp_mul_monomial(const lvs_matrix *a, const lvs_matrix *b, lvs_matrix **out) {
  int cplx = a->cplx || b->cplx;
  size_t cap = 0;
  for (size_t j = 0; j < b->cols; j++)
    if (b->cp[j + 1] > b->cp[j]) {
      size_t k = b->ri[b->cp[j]];
      cap += a->cp[k + 1] - a->cp[k];
    }
  lvs_matrix *c;
  int st = lvsi_mat_alloc(a->ctx, a->rows, b->cols, cplx, 1, cap, &c);
  if (st) return st;
  size_t nnz = 0;
  for (size_t j = 0; j < b->cols; j++) {
    c->cp[j] = nnz;
    if (b->cp[j + 1] == b->cp[j]) continue;
    size_t q = b->cp[j], k = b->ri[q];
    if (!cplx) {
      double bv = b->a[q];
      for (size_t p = a->cp[k]; p < a->cp[k + 1]; p++) {
        double v = a->a[p] * bv;
        if (v == 0.0) continue;
        c->ri[nnz] = a->ri[p];
        c->a[nnz++] = v;
      }
    } else {
      double complex bv = sval(b, q);
      for (size_t p = a->cp[k]; p < a->cp[k + 1]; p++) {
        double complex v = sval(a, p) * bv;
        if (v == 0.0) continue;
        c->ri[nnz] = a->ri[p];
        c->a[2 * nnz] = creal(v);
        c->a[2 * nnz + 1] = cimag(v);
        nnz++;
      }
    }
  }
  c->cp[b->cols] = c->nnz = nnz;
  *out = c;
  return LVS_OK;
}

static int monomial_cols(const lvs_matrix *m) {
  if (m->nnz > m->cols) return 0;
  for (size_t j = 0; j < m->cols; j++)
    if (m->cp[j + 1] - m->cp[j] > 1) return 0;
  return 1;
}

static int sp_mul(const lvs_matrix *a, const lvs_matrix *b, lvs_matrix **out) {
  lvs_ctx *ctx = a->ctx;
  int cplx = a->cplx || b->cplx;
  if (monomial_cols(b)) return sp_mul_monomial(a, b, out);
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, a->rows, b->cols, cplx, 1, a->nnz + b->nnz, &c);
  if (st) return st;
  double complex *acc = lvsi_calloc(ctx, a->rows, sizeof(double complex));
  size_t *mark = lvsi_malloc(ctx, a->rows * sizeof(size_t));
  size_t *list = lvsi_malloc(ctx, a->rows * sizeof(size_t));
  if (!acc || !mark || !list) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory in a sparse product");
    goto done;
  }
  for (size_t i = 0; i < a->rows; i++) mark[i] = SIZE_MAX;
  for (size_t j = 0; j < b->cols; j++) {
    size_t cnt = 0;
    c->cp[j] = c->nnz;
    for (size_t q = b->cp[j]; q < b->cp[j + 1]; q++) {
      size_t k = b->ri[q];
      double complex bv = sval(b, q);
      for (size_t p = a->cp[k]; p < a->cp[k + 1]; p++) {
        size_t i = a->ri[p];
        if (mark[i] != j) {
          mark[i] = j;
          acc[i] = 0;
          list[cnt++] = i;
        }
        acc[i] += sval(a, p) * bv;
      }
    }
    /* sort the row list (insertion sort for short columns) */
    if (cnt > 32) {
      qsort(list, cnt, sizeof(size_t), cmp_size);
    } else {
      for (size_t s = 1; s < cnt; s++) {
        size_t v = list[s], t = s;
        while (t > 0 && list[t - 1] > v) {
          list[t] = list[t - 1];
          t--;
        }
        list[t] = v;
      }
    }
    for (size_t s = 0; s < cnt; s++)
      if (acc[list[s]] != 0.0 && (st = lvsi_csc_push(c, list[s], acc[list[s]]))) goto done;
  }
  c->cp[b->cols] = c->nnz;
done:
  lvsi_free(ctx, acc);
  lvsi_free(ctx, mark);
  lvsi_free(ctx, list);
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

static int cmp_size(const void *x, const void *y) {
  size_t a = *(const size_t *)x, b = *(const size_t *)y;
  return a < b ? -1 : a > b;
}

static int dense_mul(const lvs_matrix *a0, const lvs_matrix *b0, lvs_matrix **out) {
  lvs_ctx *ctx = a0->ctx;
  int cplx = a0->cplx || b0->cplx;
  lvs_matrix *c, *ta = NULL, *tb = NULL;
  int st = lvsi_mat_alloc(ctx, a0->rows, b0->cols, cplx, 0, 0, &c);
  if (st) return st;
  if (a0->sparse && !b0->sparse) {
    /* C(:, j) += A(:, k) B(k, j) over A's entries */
    for (size_t j = 0; j < b0->cols; j++)
      for (size_t k = 0; k < a0->cols; k++) {
        double complex bv = lvsi_mat_at(b0, k, j);
        if (bv == 0.0) continue;
        for (size_t p = a0->cp[k]; p < a0->cp[k + 1]; p++) {
          size_t idx = a0->ri[p] + j * c->rows;
          double complex v = sval(a0, p) * bv;
          if (cplx) {
            c->a[2 * idx] += creal(v);
            c->a[2 * idx + 1] += cimag(v);
          } else {
            c->a[idx] += creal(v);
          }
        }
      }
    goto done;
  }
  if (!a0->sparse && b0->sparse) {
    for (size_t j = 0; j < b0->cols; j++)
      for (size_t q = b0->cp[j]; q < b0->cp[j + 1]; q++) {
        size_t k = b0->ri[q];
        double complex bv = sval(b0, q);
        for (size_t i = 0; i < a0->rows; i++) {
          double complex v = lvsi_mat_at(a0, i, k) * bv;
          size_t idx = i + j * c->rows;
          if (cplx) {
            c->a[2 * idx] += creal(v);
            c->a[2 * idx + 1] += cimag(v);
          } else {
            c->a[idx] += creal(v);
          }
        }
      }
    goto done;
  }
  /* both dense: BLAS (2 m n k flops, x4 complex) */
  if ((st = lvsi_fence_cost(ctx, (cplx ? 8.0 : 2.0) * (double)a0->rows * (double)b0->cols * (double)a0->cols,
                            "a dense matrix product")))
    goto done;
  const lvs_matrix *a = a0, *b = b0;
  if (cplx) {
    if (!a->cplx) {
      if ((st = lvs_matrix_copy(a0, &ta)) || (st = promote_complex(ta))) goto done;
      a = ta;
    }
    if (!b->cplx) {
      if ((st = lvs_matrix_copy(b0, &tb)) || (st = promote_complex(tb))) goto done;
      b = tb;
    }
    double complex one = 1.0, zero = 0.0;
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, (int)a->rows, (int)b->cols,
                (int)a->cols, &one, a->a, (int)a->rows, b->a, (int)b->rows, &zero, c->a,
                (int)c->rows);
  } else {
    cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, (int)a->rows, (int)b->cols,
                (int)a->cols, 1.0, a->a, (int)a->rows, b->a, (int)b->rows, 0.0, c->a,
                (int)c->rows);
  }
done:
  lvs_matrix_free(ta);
  lvs_matrix_free(tb);
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

static int raw_mul(const lvs_matrix *a, const lvs_matrix *b, lvs_matrix **out) {
  int st = (a->sparse && b->sparse) ? sp_mul(a, b, out) : dense_mul(a, b, out);
  if (st) return st;
  return lvsi_mat_compact(*out);
}

/* 1 when every stored nonzero of a padded m lies inside its visible block
 * (only matrices with infinite slack, i.e. embedded plain ones, qualify) */
static int zero_outside_vis(const lvs_matrix *m) {
  if (!m->vis || m->slack < LVS_INF_SLACK) return 0;
  unsigned char *in = lvsi_calloc(m->ctx, m->rows ? m->rows : 1, 1);
  if (!in) return 0;
  for (size_t i = 0; i < m->n; i++) in[m->vis[i]] = 1;
  int ok = 1;
  for (size_t j = 0; j < m->cols && ok; j++) {
    if (m->sparse) {
      for (size_t k = m->cp[j]; k < m->cp[j + 1]; k++)
        if ((!in[m->ri[k]] || !in[j]) && sval(m, k) != 0.0) {
          ok = 0;
          break;
        }
    } else if (!in[j]) {
      for (size_t i = 0; i < m->rows; i++)
        if (lvsi_mat_at(m, i, j) != 0.0) {
          ok = 0;
          break;
        }
    } else {
      for (size_t i = 0; i < m->rows; i++)
        if (!in[i] && lvsi_mat_at(m, i, j) != 0.0) {
          ok = 0;
          break;
        }
    }
  }
  lvsi_free(m->ctx, in);
  return ok;
}

int lvs_matrix_mul(const lvs_matrix *a0, const lvs_matrix *b0, lvs_matrix **out) {
  lvs_ctx *ctx = a0->ctx;
  *out = NULL;
  if (lvs_matrix_cols(a0) != lvs_matrix_rows(b0))
    return lvsi_fail(ctx, LVS_EDIM, "dimension mismatch in product: %zux%zu times %zux%zu",
                     lvs_matrix_rows(a0), lvs_matrix_cols(a0), lvs_matrix_rows(b0),
                     lvs_matrix_cols(b0));
  const lvs_matrix *a, *b;
  lvs_matrix *ta, *tb, *c = NULL;
  int st;
  /* padded times a plain non-square block (vectors): use the visible block */
  if ((a0->vis && !b0->vis && b0->cols != a0->n) || (b0->vis && !a0->vis && a0->rows != b0->n)) {
    lvs_matrix *va = NULL, *vb = NULL;
    if (a0->vis && (st = lvs_matrix_visible(a0, 0, &va))) return st;
    if (b0->vis && (st = lvs_matrix_visible(b0, 0, &vb))) {
      lvs_matrix_free(va);
      return st;
    }
    st = raw_mul(va ? va : a0, vb ? vb : b0, out);
    lvs_matrix_free(va);
    lvs_matrix_free(vb);
    return st;
  }
  if ((st = coerce(a0, b0, &a, &b, &ta, &tb, "product"))) return st;
  if (a->vis) {
    long ms = a->slack < b->slack ? a->slack : b->slack;
    long mb = a->band < b->band ? a->band : b->band;
    long slack = ms >= LVS_INF_SLACK ? LVS_INF_SLACK : ms - mb;
    /* A factor that is zero outside the visible block (a plain matrix such
     * as eigenvectors, embedded) never reaches past the edge: the product
     * is as exact as the other factor (C = E B: C(i, j) sums over visible k
     * only). Without this, U^T H U with a full U was refused. */
    if (slack < 0 && zero_outside_vis(a)) slack = b->slack;
    else if (slack < 0 && zero_outside_vis(b)) slack = a->slack;
    if (slack < 0) {
      st = lvsi_fail(ctx, LVS_ERANGE,
                     "operator product reaches beyond the padding of the truncated basis, so its "
                     "edge would be wrong; build the basis with a larger pad");
      goto done;
    }
    if ((st = raw_mul(a, b, &c))) goto done;
    c->slack = slack;
    c->band = band_sum(a->band, b->band);
    if (c->band > (long)c->rows) c->band = (long)c->rows;
    if ((st = lvsi_set_vis(c, a->n, a->vis))) goto done;
  } else {
    if ((st = raw_mul(a, b, &c))) goto done;
  }
done:
  lvs_matrix_free(ta);
  lvs_matrix_free(tb);
  if (st) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

int lvs_matrix_pow(const lvs_matrix *a, int k, lvs_matrix **out) {
  *out = NULL;
  if (lvs_matrix_rows(a) != lvs_matrix_cols(a))
    return lvsi_fail(a->ctx, LVS_EDIM, "power of a non-square %zux%zu matrix", lvs_matrix_rows(a),
                     lvs_matrix_cols(a));
  if (k < 0) return lvsi_fail(a->ctx, LVS_ERANGE, "negative power %d", k);
  if (k == 0) return identity_like(a, out);
  lvs_matrix *acc;
  int st = lvs_matrix_copy(a, &acc);
  if (st) return st;
  for (int i = 1; i < k; i++) {
    lvs_matrix *n;
    if ((st = lvs_matrix_mul(acc, a, &n))) {
      lvs_matrix_free(acc);
      return st;
    }
    lvs_matrix_free(acc);
    acc = n;
  }
  *out = acc;
  return LVS_OK;
}

int lvs_matrix_adj(const lvs_matrix *a, lvs_matrix **out) {
  lvs_ctx *ctx = a->ctx;
  lvs_matrix *c;
  int st;
  *out = NULL;
  if (!a->sparse) {
    if ((st = lvsi_mat_alloc(ctx, a->cols, a->rows, a->cplx, 0, 0, &c))) return st;
    for (size_t j = 0; j < a->cols; j++)
      for (size_t i = 0; i < a->rows; i++) {
        size_t s = i + j * a->rows, d = j + i * a->cols;
        if (a->cplx) {
          c->a[2 * d] = a->a[2 * s];
          c->a[2 * d + 1] = -a->a[2 * s + 1];
        } else {
          c->a[d] = a->a[s];
        }
      }
  } else {
    if ((st = lvsi_mat_alloc(ctx, a->cols, a->rows, a->cplx, 1, a->nnz, &c))) return st;
    for (size_t k = 0; k < a->nnz; k++) c->cp[a->ri[k] + 1]++;
    for (size_t i = 0; i < a->rows; i++) c->cp[i + 1] += c->cp[i];
    size_t *next = lvsi_malloc(ctx, (a->rows ? a->rows : 1) * sizeof(size_t));
    if (!next) {
      lvs_matrix_free(c);
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
    }
    memcpy(next, c->cp, a->rows * sizeof(size_t));
    for (size_t j = 0; j < a->cols; j++)
      for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) {
        size_t d = next[a->ri[k]]++;
        c->ri[d] = j;
        if (a->cplx) {
          c->a[2 * d] = a->a[2 * k];
          c->a[2 * d + 1] = -a->a[2 * k + 1];
        } else {
          c->a[d] = a->a[k];
        }
      }
    c->nnz = a->nnz;
    lvsi_free(ctx, next);
  }
  c->slack = a->slack;
  c->band = a->band;
  if (a->vis && (st = lvsi_set_vis(c, a->n, a->vis))) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}

/* keeps the largest defect (NaN counts as infinite) and where it is */
void lvsi_note_defect(double d, size_t i, size_t j, double *worst, size_t *wi, size_t *wj) {
  if (d > *worst || isnan(d)) {
    *worst = isnan(d) ? INFINITY : d;
    *wi = i;
    *wj = j;
  }
}

/* |A_ij - conj(A_ji)| of stored entry k = (i, j) against its partner t
 * (SIZE_MAX: none), noted when it beats *worst. Complex: the squared
 * modulus screens the entry and hypot (exact, no overflow) runs only for a
 * candidate, so a Hermitian op costs no hypot per entry. */
static void note_pair(const lvs_matrix *a, size_t k, size_t t, size_t i, size_t j, double *worst,
                      size_t *wi, size_t *wj) {
  if (!a->cplx) {
    lvsi_note_defect(fabs(a->a[k] - (t == SIZE_MAX ? 0.0 : a->a[t])), i, j, worst, wi, wj);
    return;
  }
  double re = a->a[2 * k] - (t == SIZE_MAX ? 0.0 : a->a[2 * t]);
  double im = a->a[2 * k + 1] + (t == SIZE_MAX ? 0.0 : a->a[2 * t + 1]);
  double d2 = re * re + im * im;
  if (d2 > *worst * *worst || !isfinite(d2))
    lvsi_note_defect(hypot(re, im), i, j, worst, wi, wj);
}

/* A plain sparse op, O(nnz log nnz). Pass 0: each lower entry (i > j)
 * against its stored partner (binary search in column i) and each
 * diagonal entry against itself (2|Im A_ii|, NaN as NaN); when every stored upper
 * entry was somebody's partner that covers all pairs (a pair's difference
 * is symmetric), else pass 1 scans the off-diagonal entries again and finds
 * the worst unpaired one too. A pair is reported at its lower entry. */
static double sparse_defect(const lvs_matrix *a, size_t *wi, size_t *wj) {
  double worst = 0.0;
  size_t upper = 0, paired = 0;
  for (int pass = 0; pass < 2 && !(pass == 1 && paired >= upper); pass++)
    for (size_t j = 0; j < a->cols; j++)
      for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) {
        size_t i = a->ri[k];
        if (pass == 0) {
          upper += i < j;
          if (i < j) continue;
        }
        if (i == j) { /* itself: 2|Im A_ii|, or NaN */
          if (pass == 0) note_pair(a, k, k, i, j, &worst, wi, wj);
          continue;
        }
        size_t t = sp_find(a, j, i);
        paired += pass == 0 && t != SIZE_MAX;
        note_pair(a, k, t, i, j, &worst, wi, wj);
      }
  return worst;
}

double lvs_matrix_max_abs(const lvs_matrix *a) {
  size_t cnt = a->sparse ? a->nnz : a->rows * a->cols;
  double big = 0;
  for (size_t k = 0; k < cnt; k++) {
    double m = a->cplx ? hypot(a->a[2 * k], a->a[2 * k + 1]) : fabs(a->a[k]);
    if (isnan(m)) return NAN;
    big = fmax(big, m);
  }
  return big;
}

double lvs_matrix_hermitian_defect(const lvs_matrix *a, size_t *pi, size_t *pj) {
  double worst = 0.0;
  size_t wi = 0, wj = 0;
  size_t n = lvs_matrix_rows(a);
  if (n != lvs_matrix_cols(a)) {
    if (pi) *pi = 0;
    if (pj) *pj = 0;
    return INFINITY;
  }
  lvs_matrix *v = NULL;
  if (a->sparse && a->vis && lvs_matrix_visible(a, 0, &v)) lvs_clear_error(a->ctx); /* v NULL: loop below */
  if (a->sparse && (v || !a->vis)) { /* padded: its visible plain copy */
    worst = sparse_defect(v ? v : a, &wi, &wj);
    lvs_matrix_free(v);
  } else { /* dense (O(n^2) storage anyway), or no memory for the copy */
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i <= j; i++) {
        double d = cabs(lvsi_mat_at(a, vmap(a, i), vmap(a, j)) -
                        conj(lvsi_mat_at(a, vmap(a, j), vmap(a, i))));
        lvsi_note_defect(d, i, j, &worst, &wi, &wj);
      }
  }
  if (pi) *pi = wi;
  if (pj) *pj = wj;
  return worst;
}

int lvs_matrix_visible(const lvs_matrix *a, int want_dense, lvs_matrix **out) {
  lvs_ctx *ctx = a->ctx;
  *out = NULL;
  int st;
  if (!a->vis) {
    if (want_dense && a->sparse) return lvsi_to_dense(a, out);
    return lvs_matrix_copy(a, out);
  }
  size_t n = a->n;
  lvs_matrix *c;
  if (want_dense || !a->sparse) {
    if ((st = lvsi_mat_alloc(ctx, n, n, a->cplx, 0, 0, &c))) return st;
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        double complex v = lvsi_mat_at(a, a->vis[i], a->vis[j]);
        size_t k = i + j * n;
        if (a->cplx) {
          c->a[2 * k] = creal(v);
          c->a[2 * k + 1] = cimag(v);
        } else {
          c->a[k] = creal(v);
        }
      }
  } else {
    size_t *map = lvsi_malloc(ctx, a->rows * sizeof(size_t));
    if (!map) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
    for (size_t i = 0; i < a->rows; i++) map[i] = SIZE_MAX;
    for (size_t i = 0; i < n; i++) map[a->vis[i]] = i;
    if ((st = lvsi_mat_alloc(ctx, n, n, a->cplx, 1, a->nnz, &c))) {
      lvsi_free(ctx, map);
      return st;
    }
    for (size_t j = 0; j < n; j++) {
      size_t sj = a->vis[j];
      c->cp[j] = c->nnz;
      for (size_t k = a->cp[sj]; k < a->cp[sj + 1]; k++)
        if (map[a->ri[k]] != SIZE_MAX && (st = lvsi_csc_push(c, map[a->ri[k]], sval(a, k)))) {
          lvsi_free(ctx, map);
          lvs_matrix_free(c);
          return st;
        }
    }
    c->cp[n] = c->nnz;
    lvsi_free(ctx, map);
  }
  *out = c;
  return LVS_OK;
}

double *lvs_matrix_data(lvs_matrix *m) { return (m->sparse || m->vis) ? NULL : m->a; }

int lvs_matrix_kron(const lvs_matrix *a, const lvs_matrix *b, lvs_matrix **out) {
  lvs_ctx *ctx = a->ctx;
  *out = NULL;
  if (a->vis || b->vis)
    return lvsi_fail(ctx, LVS_EINVAL, "kron: operands must be plain matrices");
  size_t rows = a->rows * b->rows, cols = a->cols * b->cols;
  if (a->rows && rows / a->rows != b->rows)
    return lvsi_fail(ctx, LVS_ECAP, "kron: size overflows");
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, rows, cols, a->cplx || b->cplx, 1,
                          lvs_matrix_nnz(a) * lvs_matrix_nnz(b), &c);
  if (st) return st;
  for (size_t ja = 0; ja < a->cols; ja++)
    for (size_t jb = 0; jb < b->cols; jb++) {
      c->cp[ja * b->cols + jb] = c->nnz;
      for (size_t ia = 0; ia < a->rows; ia++) {
        double complex av = lvsi_mat_at(a, ia, ja);
        if (av == 0.0) continue;
        for (size_t ib = 0; ib < b->rows; ib++) {
          double complex bv = lvsi_mat_at(b, ib, jb);
          if (bv != 0.0 && (st = lvsi_csc_push(c, ia * b->rows + ib, av * bv))) {
            lvs_matrix_free(c);
            return st;
          }
        }
      }
    }
  c->cp[cols] = c->nnz;
  *out = c;
  return LVS_OK;
}

int lvs_matrix_apply(const lvs_matrix *a, int cplx, const double *x, double *y) {
  if (a->cplx && !cplx)
    return lvsi_fail(a->ctx, LVS_EINVAL, "apply: complex matrix needs complex vectors");
  if (a->vis) return lvsi_fail(a->ctx, LVS_EINVAL, "apply: take the visible block first");
  size_t r = a->rows, c = a->cols;
  if (!cplx) {
    memset(y, 0, r * sizeof(double));
    if (a->sparse) {
      for (size_t j = 0; j < c; j++) {
        double xj = x[j];
        if (xj == 0.0) continue;
        for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) y[a->ri[k]] += a->a[k] * xj;
      }
    } else {
      cblas_dgemv(CblasColMajor, CblasNoTrans, (int)r, (int)c, 1.0, a->a, (int)r, x, 1, 0.0, y, 1);
    }
    return LVS_OK;
  }
  const double complex *xc = (const double complex *)x;
  double complex *yc = (double complex *)y;
  memset(y, 0, 2 * r * sizeof(double));
  if (a->sparse) {
    for (size_t j = 0; j < c; j++) {
      double complex xj = xc[j];
      if (xj == 0.0) continue;
      for (size_t k = a->cp[j]; k < a->cp[j + 1]; k++) yc[a->ri[k]] += sval(a, k) * xj;
    }
  } else if (a->cplx) {
    double complex one = 1.0, zero = 0.0;
    cblas_zgemv(CblasColMajor, CblasNoTrans, (int)r, (int)c, &one, a->a, (int)r, x, 1, &zero, y, 1);
  } else {
    for (size_t j = 0; j < c; j++)
      for (size_t i = 0; i < r; i++) yc[i] += a->a[i + j * r] * xc[j];
  }
  return LVS_OK;
}

/* Build from triplets (0-based, any order; duplicates are summed). */
static const size_t *g_sort_i, *g_sort_j;
static int cmp_trip(const void *x, const void *y) {
  size_t a = *(const size_t *)x, b = *(const size_t *)y;
  if (g_sort_j[a] != g_sort_j[b]) return g_sort_j[a] < g_sort_j[b] ? -1 : 1;
  if (g_sort_i[a] != g_sort_i[b]) return g_sort_i[a] < g_sort_i[b] ? -1 : 1;
  return 0;
}

int lvs_matrix_from_triplets(lvs_ctx *ctx, size_t rows, size_t cols, size_t nnz, const size_t *ii,
                             const size_t *jj, const double *re, const double *im,
                             lvs_matrix **out) {
  *out = NULL;
  if (rows == 0 || cols == 0)
    return lvsi_fail(ctx, LVS_EINVAL, "matrix size must be positive, got %zux%zu", rows, cols);
  int cplx = 0;
  for (size_t k = 0; k < nnz; k++) {
    if (ii[k] >= rows || jj[k] >= cols)
      return lvsi_fail(ctx, LVS_ERANGE, "entry (%zu, %zu) outside a %zux%zu matrix", ii[k] + 1,
                       jj[k] + 1, rows, cols);
    if (!isfinite(re[k]) || (im && !isfinite(im[k])))
      return lvsi_fail(ctx, LVS_EINVAL, "entry (%zu, %zu) is NaN or infinite", ii[k] + 1, jj[k] + 1);
    if (im && im[k] != 0.0) cplx = 1;
  }
  size_t *perm = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof(size_t));
  if (!perm) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
  for (size_t k = 0; k < nnz; k++) perm[k] = k;
  g_sort_i = ii; /* not thread-safe; the binding is single-threaded per state */
  g_sort_j = jj;
  qsort(perm, nnz, sizeof(size_t), cmp_trip);
  lvs_matrix *c;
  int st = lvsi_mat_alloc(ctx, rows, cols, cplx, 1, nnz, &c);
  if (st) {
    lvsi_free(ctx, perm);
    return st;
  }
  size_t col = 0, k = 0;
  for (col = 0; col < cols; col++) {
    c->cp[col] = c->nnz;
    while (k < nnz && jj[perm[k]] == col) {
      size_t p = perm[k];
      double complex v = CMPLX(re[p], im ? im[p] : 0.0);
      k++;
      while (k < nnz && jj[perm[k]] == col && ii[perm[k]] == ii[p]) {
        v += CMPLX(re[perm[k]], im ? im[perm[k]] : 0.0);
        k++;
      }
      if (v != 0.0) lvsi_csc_push(c, ii[p], v); /* capacity reserved */
    }
  }
  c->cp[cols] = c->nnz;
  lvsi_free(ctx, perm);
  if ((st = lvsi_mat_compact(c))) {
    lvs_matrix_free(c);
    return st;
  }
  *out = c;
  return LVS_OK;
}
