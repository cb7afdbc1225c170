/* internal.h -- definitions shared by the core's files; never installed. */
#ifndef LVS_INTERNAL_H
#define LVS_INTERNAL_H

#include <complex.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include "levelshift.h"

#define LVSI __attribute__((visibility("hidden")))
#define LVS_INF_SLACK 1000000000L
#define LVSI_SPARSE_MAX_DIM ((size_t)UINT32_MAX) /* rows of sparse storage */

struct lvs_ctx {
  lvs_alloc_fn alloc;
  void *ud;
  int code;
  char msg[512];
  size_t dense_cap;
  size_t refused; /* last block refused by lvsi_malloc for the cap (0: none) */
  lvs_fence *fence; /* BORROWED from the host (NULL: none) */
};

/* Matrix storage. Stored size rows x cols; for a padded square operator the
 * visible block is the n indices in vis (ascending). Sparse storage is CSC:
 * column j holds entries cp[j] .. cp[j+1]-1 with row ri[k] and value a[k]
 * (a[2k], a[2k+1] when complex). slack/band track how many padded levels of
 * the stored matrix are still exact and its bandwidth (see matrix.c). */
struct lvs_matrix {
  lvs_ctx *ctx;
  size_t rows, cols;
  size_t n;     /* visible dimension when vis != NULL */
  size_t *vis;  /* NULL: plain matrix */
  int cplx;
  int sparse;
  double *a;
  size_t *cp;
  uint32_t *ri; /* 32-bit rows: 12 bytes an entry instead of 16 (sparse
                   storage is refused above LVSI_SPARSE_MAX_DIM rows) */
  size_t nnz, cap;
  long slack, band;
};

LVSI int lvsi_fail(lvs_ctx *ctx, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
LVSI void *lvsi_malloc(lvs_ctx *ctx, size_t size);
LVSI void *lvsi_calloc(lvs_ctx *ctx, size_t n, size_t size);
LVSI void lvsi_free(lvs_ctx *ctx, void *p);
/* the work fence (ctx.c): LVS_ESTOP with "deadline of S s exceeded in WHERE"
 * or "interrupted by the host in WHERE" once the host's deadline passed or
 * it interrupted; _cost also refuses work of `flops` that cannot end before
 * the deadline at LVS_FENCE_FLOPS; 0 otherwise (and always without fence) */
LVSI int lvsi_fence(lvs_ctx *ctx, const char *where);
LVSI int lvsi_fence_cost(lvs_ctx *ctx, double flops, const char *where);
/* checks n*m*elem against overflow and the dense cap; what names the request */
LVSI int lvsi_dense_ok(lvs_ctx *ctx, size_t n, size_t m, size_t elem,
                       const char *what);

/* BLAS thread control (lazyla.c; loads the BLAS): OpenBLAS's thread count
 * (0 with a BLAS without that control), set it, stop its idle pool */
LVSI int lvsi_blas_threads(void);
LVSI void lvsi_set_blas_threads(int n);
LVSI void lvsi_blas_pool_stop(void);

/* matrix internals */
LVSI int lvsi_mat_alloc(lvs_ctx *ctx, size_t rows, size_t cols, int cplx,
                        int sparse, size_t nnzcap, lvs_matrix **out);
LVSI int lvsi_mat_reserve(lvs_matrix *m, size_t nnzcap);
LVSI double complex lvsi_mat_at(const lvs_matrix *m, size_t i, size_t j);
LVSI int lvsi_set_vis(lvs_matrix *m, size_t n, const size_t *vis);
/* build a CSC matrix from column-sorted triplets helper: append entry to
 * column being built (caller closes columns) */
LVSI int lvsi_csc_push(lvs_matrix *m, size_t row, double complex v);
LVSI int lvsi_mat_compact(lvs_matrix *m); /* dense if fill is high */
/* a sparse column's entries sorted by row, stable (matrix.c: runs merged,
 * insertion sort when short; tmp holds cnt entries) */
typedef struct {
  size_t row;
  double re, im;
} lvsi_ent;
LVSI void lvsi_sort_entries(lvsi_ent *e, size_t cnt, lvsi_ent *tmp);
LVSI int lvsi_to_dense(const lvs_matrix *a, lvs_matrix **out);

/* structure (blocks.c): true bandwidth of a plain matrix; connected
 * components of the sparsity graph of a (and b), numbered by smallest state */
LVSI long lvsi_mat_bandwidth(const lvs_matrix *m);
/* symmetry checks: keep the largest defect d (NaN as infinite) at (i, j) */
LVSI void lvsi_note_defect(double d, size_t i, size_t j, double *worst, size_t *wi, size_t *wj);
LVSI int lvsi_components(const lvs_matrix *a, const lvs_matrix *b, size_t *comp, size_t *ncomp);
/* eigen.c: the dense path of lvs_eigen (no structure detection) */
LVSI int lvs_eigen_dense(const lvs_matrix *h, size_t count, int want_vectors, double *w, lvs_matrix **vecs);

/* krylov.c: ARPACK on a plain sparse Hermitian op (see lvs_eigen_ex);
 * Gershgorin bounds of a plain sparse Hermitian op */
LVSI int lvsi_krylov(const lvs_matrix *a, size_t count, const lvs_eigen_opts *o, double *w, double *z);
LVSI void lvsi_gershgorin(const lvs_matrix *a, double *lo, double *hi);
LVSI int lvsi_krylov_pays(const lvs_matrix *h, size_t top);
LVSI int lvsi_lowest_levels(const lvs_matrix *h, size_t top, double dtol, double *E, double complex **pv,
                            size_t *pm);
/* sparse_lu.c: UMFPACK LU of an n x n CSC matrix (arrays copied; complex
 * interleaved); a singular matrix is LVS_EINVAL */
typedef struct lvsi_splu lvsi_splu;
LVSI int lvsi_splu_new(lvs_ctx *ctx, size_t n, int cplx, const size_t *cp, const size_t *ri, const double *a,
                       const char *what, lvsi_splu **out);
LVSI int lvsi_splu_solve(const lvsi_splu *f, const double *b, double *x);
LVSI void lvsi_splu_free(lvsi_splu *f);
LVSI size_t lvsi_splu_dim(const lvsi_splu *f);
#define LVSI_SPLU_TOO_FULL 100 /* lvsi_splu_new_capped: the factors would pass the budget */
LVSI int lvsi_splu_new_capped(lvs_ctx *ctx, size_t n, int cplx, const size_t *cp, const size_t *ri, const double *a,
                              double max_bytes, const char *what, lvsi_splu **out);
/* krylov.c: y = H x (x, y complex interleaved) for a plain sparse Hermitian
 * op, gathered on its own storage (BORROWED: the op must outlive the
 * object), two threads when large */
typedef struct lvsi_symop lvsi_symop;
LVSI int lvsi_symop_new(const lvs_matrix *a, lvsi_symop **out);
LVSI void lvsi_symop_free(lvsi_symop *s);
LVSI void lvsi_symop_apply_complex(lvsi_symop *s, const double *x, double *y);
/* resolvent.c: x = Q (E - H0)^{-1} Q r for a group P (n x d, orthonormal,
 * BORROWED for the object's life) of a plain sparse Hermitian H0; bordered
 * sparse LU when its factors stay small (allow_lu), MINRES otherwise */
typedef struct lvsi_resolvent lvsi_resolvent;
LVSI int lvsi_resolvent_new(const lvs_matrix *h, const double complex *P, size_t d, double e, int allow_lu,
                            lvsi_resolvent **out);
LVSI int lvsi_resolvent_solve(lvsi_resolvent *r, const double complex *rhs, double complex *x);
LVSI void lvsi_resolvent_free(lvsi_resolvent *r);
LVSI const char *lvsi_resolvent_method(const lvsi_resolvent *r);
LVSI size_t lvsi_resolvent_iterations(const lvsi_resolvent *r);

LVSI int lvsi_check_hermitian(const lvs_matrix *h, double tol, const char *what);
LVSI int lvsi_basis_twoS(const lvs_basis *b);
/* basis kinds defined in their own files (box.c, rotor.c); see basis.c */
#define LVSI_BASIS_NPAR 4
typedef int (*lvsi_basis_op_fn)(const lvs_basis *b, const char *name, lvs_matrix **out, long *band);
LVSI int lvsi_basis_new_kind(lvs_ctx *ctx, lvs_basis_kind kind, size_t n, size_t nlab,
                             const char *const *names, lvsi_basis_op_fn op, const double *par,
                             size_t npar, lvs_basis **out);
LVSI void lvsi_basis_set_label(lvs_basis *b, size_t s, size_t k, double v);
LVSI const double *lvsi_basis_par(const lvs_basis *b);
LVSI lvs_ctx *lvsi_basis_ctx(const lvs_basis *b);
LVSI int lvsi_basis_padded(const lvs_basis *b); /* a product with a padded site */
LVSI int lvsi_place_check(const lvs_basis *b, size_t site, const lvs_matrix *m);


/* mspace.c: model spaces of nearly degenerate levels for the series (see
 * its head comment for the rule). Working indices are the series' sorted
 * levels; E[0..nk) is known (ascending), col(u, j, y) adds column j of V in
 * the working basis to y (nk entries, zeroed by the caller). */
typedef struct {
  size_t d, *lev;      /* members, 0-based levels, ascending */
  size_t nsub;         /* exact groups inside */
  int hand;            /* chosen by the caller */
  int K, real;         /* terms 0..K; all real */
  double complex *terms; /* (K + 1) blocks d x d: the effective Hamiltonian (effective.c) */
  char why[256];
} lvsi_mspace;
typedef struct {
  size_t nk;
  const double *E;
  double gtol;         /* exact-degeneracy tolerance (absolute) */
  const unsigned char *want;
  double lambda_max, factor, vnorm; /* vnorm: max column 1-norm of V */
  size_t nmax;
  int join;           /* 0: report neighbours only */
  int (*col)(void *u, size_t j, double complex *y);
  /* the wanted group [g0, g1)'s nearest exact group left outside within the
   * window: its first level nb (SIZE_MAX: none), gap and coupling */
  void (*note)(void *u, size_t g0, size_t g1, size_t nb, double gap, double kappa);
  void *u;
} lvsi_mspace_in;
typedef struct {
  double gap, kappa;
  size_t a, b;
} lvsi_mspace_note;
LVSI int lvsi_mspace_find(lvs_ctx *ctx, const lvsi_mspace_in *in, lvsi_mspace **out, size_t *nout, char *note,
                          size_t notelen);
LVSI int lvsi_mspace_eigvals(lvs_ctx *ctx, const lvsi_mspace *m, double lambda, int order, double *w);
LVSI void lvsi_mspace_clear(lvs_ctx *ctx, lvsi_mspace *m);

#endif
