/* blocks.c -- block assembly of operators and structure queries
 * (bandwidth, connected components of the sparsity graph).
 *
 * lvs_matrix_blocks builds one sparse operator from a grid of blocks, the
 * way symmetry sectors (l = 0, 1, ...; total Sz) or coupled radial channels
 * are put together. The result is compacted like any sparse result (dense
 * above 25% fill). Padded operators contribute their visible block. */
#include <math.h>
#include <stdint.h>
#include <string.h>
#include "internal.h"

static double complex bval(const lvs_matrix *m, size_t k) {
  return m->cplx ? CMPLX(m->a[2 * k], m->a[2 * k + 1]) : m->a[k];
}

/* Largest |i - j| over the stored nonzero entries of a plain matrix (the
 * visible block for a padded one is not considered: callers pass plain
 * copies). 0 for a diagonal or empty matrix. Sparse columns keep their rows
 * ascending, so only the first and the last nonzero entry of a column
 * count: O(columns) unless entries stored as zero have to be skipped. */
long lvsi_mat_bandwidth(const lvs_matrix *m) {
  long b = 0;
  if (m->sparse) {
    for (size_t j = 0; j < m->cols; j++) {
      size_t k0 = m->cp[j], k1 = m->cp[j + 1];
      while (k0 < k1 && bval(m, k0) == 0.0) k0++;
      while (k1 > k0 && bval(m, k1 - 1) == 0.0) k1--;
      if (k0 == k1) continue;
      long lo = (long)j - (long)m->ri[k0], hi = (long)m->ri[k1 - 1] - (long)j;
      if (lo > b) b = lo;
      if (hi > b) b = hi;
    }
    return b;
  }
  for (size_t j = 0; j < m->cols; j++)
    for (size_t i = 0; i < m->rows; i++) {
      size_t k = i + j * m->rows;
      int nz = m->cplx ? (m->a[2 * k] != 0.0 || m->a[2 * k + 1] != 0.0) : m->a[k] != 0.0;
      if (!nz) continue;
      long d = (long)i - (long)j;
      if (d < 0) d = -d;
      if (d > b) b = d;
    }
  return b;
}

int lvs_matrix_bandwidth(const lvs_matrix *m, size_t *band) {
  if (!m->vis) {
    *band = (size_t)lvsi_mat_bandwidth(m);
    return LVS_OK;
  }
  lvs_matrix *p;
  int st = lvs_matrix_visible(m, 0, &p);
  if (st) return st;
  *band = (size_t)lvsi_mat_bandwidth(p);
  lvs_matrix_free(p);
  return LVS_OK;
}

/* Union-find root with path halving. */
static size_t uf_root(size_t *par, size_t i) {
  while (par[i] != i) {
    par[i] = par[par[i]];
    i = par[i];
  }
  return i;
}

/* Connected components of the sparsity graph of the square plain matrices
 * a (and b when not NULL): i ~ j when a(i,j) or b(i,j) is nonzero. comp[i]
 * gets the component number of state i, numbered 0.. in order of each
 * component's smallest state; returns the count in *ncomp. Deterministic. */
int lvsi_components(const lvs_matrix *a, const lvs_matrix *b, size_t *comp, size_t *ncomp) {
  lvs_ctx *ctx = a->ctx;
  size_t n = a->rows;
  size_t *par = lvsi_malloc(ctx, (n ? n : 1) * sizeof(size_t));
  if (!par) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory finding blocks");
  for (size_t i = 0; i < n; i++) par[i] = i;
  const lvs_matrix *ms[2] = {a, b};
  for (int w = 0; w < 2; w++) {
    const lvs_matrix *m = ms[w];
    if (!m) continue;
    for (size_t j = 0; j < m->cols; j++) {
      if (m->sparse) {
        for (size_t k = m->cp[j]; k < m->cp[j + 1]; k++) {
          if (bval(m, k) == 0.0) continue;
          size_t ri = uf_root(par, m->ri[k]), rj = uf_root(par, j);
          if (ri != rj) par[ri > rj ? ri : rj] = ri < rj ? ri : rj;
        }
      } else {
        for (size_t i = 0; i < m->rows; i++) {
          size_t k = i + j * m->rows;
          int nz = m->cplx ? (m->a[2 * k] != 0.0 || m->a[2 * k + 1] != 0.0) : m->a[k] != 0.0;
          if (!nz) continue;
          size_t ri = uf_root(par, i), rj = uf_root(par, j);
          if (ri != rj) par[ri > rj ? ri : rj] = ri < rj ? ri : rj;
        }
      }
    }
  }
  /* number components by their smallest member: roots are the smallest
   * index of their set because we always link the larger root under the
   * smaller one */
  size_t cnt = 0;
  for (size_t i = 0; i < n; i++) {
    size_t r = uf_root(par, i);
    if (r == i) comp[i] = cnt++;
    else comp[i] = comp[r];
  }
  lvsi_free(ctx, par);
  *ncomp = cnt;
  return LVS_OK;
}

int lvs_matrix_blocks(lvs_ctx *ctx, size_t nbr, size_t nbc, const lvs_matrix *const *blk,
                      lvs_matrix **out) {
  *out = NULL;
  if (nbr == 0 || nbc == 0) return lvsi_fail(ctx, LVS_EINVAL, "blocks: empty block grid");
  if (nbr > ((size_t)1 << 20) || nbc > ((size_t)1 << 20))
    return lvsi_fail(ctx, LVS_EINVAL, "blocks: too many blocks");
  int st = LVS_OK;
  size_t *h = lvsi_calloc(ctx, nbr + 1, sizeof(size_t));
  size_t *w = lvsi_calloc(ctx, nbc + 1, sizeof(size_t));
  lvs_matrix **plain = lvsi_calloc(ctx, nbr * nbc, sizeof(lvs_matrix *));
  lvs_matrix *c = NULL;
  if (!h || !w || !plain) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory assembling blocks");
    goto done;
  }
  /* sizes: every block row and column needs one operator to fix it */
  for (size_t bi = 0; bi < nbr; bi++)
    for (size_t bj = 0; bj < nbc; bj++) {
      const lvs_matrix *m = blk[bi * nbc + bj];
      if (!m) continue;
      size_t r = lvs_matrix_rows(m), cc = lvs_matrix_cols(m);
      if (h[bi] && h[bi] != r) {
        st = lvsi_fail(ctx, LVS_EDIM, "blocks: block (%zu, %zu) has %zu rows, others in its row %zu",
                       bi + 1, bj + 1, r, h[bi]);
        goto done;
      }
      if (w[bj] && w[bj] != cc) {
        st = lvsi_fail(ctx, LVS_EDIM,
                       "blocks: block (%zu, %zu) has %zu columns, others in its column %zu", bi + 1,
                       bj + 1, cc, w[bj]);
        goto done;
      }
      h[bi] = r;
      w[bj] = cc;
    }
  for (size_t bi = 0; bi < nbr; bi++)
    if (!h[bi]) {
      st = lvsi_fail(ctx, LVS_EINVAL, "blocks: block row %zu has no matrix to fix its height", bi + 1);
      goto done;
    }
  for (size_t bj = 0; bj < nbc; bj++)
    if (!w[bj]) {
      st = lvsi_fail(ctx, LVS_EINVAL, "blocks: block column %zu has no matrix to fix its width",
                     bj + 1);
      goto done;
    }
  size_t rows = 0, cols = 0, nnz = 0;
  int cplx = 0;
  for (size_t bi = 0; bi < nbr; bi++) {
    if (rows + h[bi] < rows) goto overflow;
    rows += h[bi];
  }
  for (size_t bj = 0; bj < nbc; bj++) {
    if (cols + w[bj] < cols) goto overflow;
    cols += w[bj];
  }
  for (size_t k = 0; k < nbr * nbc; k++) {
    const lvs_matrix *m = blk[k];
    if (!m) continue;
    if (m->vis && (st = lvs_matrix_visible(m, 0, &plain[k]))) goto done;
    const lvs_matrix *p = plain[k] ? plain[k] : m;
    nnz += p->sparse ? p->nnz : p->rows * p->cols;
    cplx |= p->cplx;
  }
  if ((st = lvsi_mat_alloc(ctx, rows, cols, cplx, 1, nnz, &c))) goto done;
  /* nnz is the exact capacity: entries are written directly (no push and
   * no capacity check per entry), nonzero ones only, and the true bandwidth
   * is measured on the way */
  size_t col = 0, nz = 0;
  long band = 0;
  for (size_t bj = 0; bj < nbc; bj++)
    for (size_t j = 0; j < w[bj]; j++, col++) {
      c->cp[col] = nz;
      size_t roff = 0;
      for (size_t bi = 0; bi < nbr; bi++) {
        const lvs_matrix *m = blk[bi * nbc + bj];
        const lvs_matrix *p = plain[bi * nbc + bj] ? plain[bi * nbc + bj] : m;
        if (p) {
          size_t k0 = p->sparse ? p->cp[j] : j * p->rows;
          size_t k1 = p->sparse ? p->cp[j + 1] : (j + 1) * p->rows;
          for (size_t k = k0; k < k1; k++) {
            double re = p->cplx ? p->a[2 * k] : p->a[k], im = p->cplx ? p->a[2 * k + 1] : 0.0;
            if (re == 0.0 && im == 0.0) continue;
            size_t row = roff + (p->sparse ? p->ri[k] : k - k0);
            c->ri[nz] = row;
            if (cplx) {
              c->a[2 * nz] = re;
              c->a[2 * nz + 1] = im;
            } else {
              c->a[nz] = re;
            }
            nz++;
            long d = (long)row - (long)col;
            if (d < 0) d = -d;
            if (d > band) band = d;
          }
        }
        roff += h[bi];
      }
    }
  c->nnz = nz;
  c->cp[cols] = c->nnz;
  c->band = band;
  if ((st = lvsi_mat_compact(c))) goto done;
  *out = c;
  c = NULL;
  goto done;
overflow:
  st = lvsi_fail(ctx, LVS_ECAP, "blocks: size overflows");
done:
  if (plain)
    for (size_t k = 0; k < nbr * nbc; k++) lvs_matrix_free(plain[k]);
  lvsi_free(ctx, plain);
  lvsi_free(ctx, h);
  lvsi_free(ctx, w);
  lvs_matrix_free(c);
  return st;
}
