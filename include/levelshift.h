/*
 * levelshift.h -- public C API of levelshift: perturbation theory for quantum
 * levels (core objects, no Lua) and the embedding calls (a Lua state with the
 * module preloaded).
 *
 * Conventions (see DEVELOPERS.md):
 *   - every object lives in an lvs_ctx, which owns the allocator, the dense
 *     size cap and the last error; there is no global state;
 *   - functions return an lvs_status; on failure *out is NULL, nothing leaks,
 *     and lvs_errmsg(ctx) says what went wrong;
 *   - indices in the C API are 0-based; matrices are column-major, complex
 *     values interleaved (re, im);
 *   - _free(NULL) does nothing and never fails.
 */
#ifndef LEVELSHIFT_H
#define LEVELSHIFT_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#if defined(_WIN32)
#define LVS_API __declspec(dllexport)
#else
#define LVS_API __attribute__((visibility("default")))
#endif

#define LVS_VERSION_MAJOR 0
#define LVS_VERSION_MINOR 1
#define LVS_VERSION_PATCH 0
#define LVS_VERSION "0.1.0"
LVS_API const char *lvs_version(void); /* run-time version string */
/* Opens LAPACKE and CBLAS now (the core opens them on first use, so a
 * program that never needs them never loads them) and tells which
 * libraries were opened and OpenBLAS's thread count (0 with another BLAS);
 * any pointer may be NULL. A library that cannot be opened is named on
 * stderr and the process exits with status 127, as the dynamic loader does
 * at start-up. LVS_LAPACKE and LVS_CBLAS in the environment name other
 * libraries with the same interface. */
LVS_API void lvs_linalg(const char **lapacke, const char **cblas, int *blas_threads);

/* Status codes. Never renumbered. */
typedef enum {
  LVS_OK = 0,      /* success */
  LVS_ENOMEM = 1,  /* an allocation failed */
  LVS_EINVAL = 2,  /* an argument is invalid (NaN, wrong kind, bad option) */
  LVS_EDIM = 3,    /* dimensions do not match */
  LVS_ERANGE = 4,  /* an index or order is out of range */
  LVS_ENOCONV = 5, /* an iteration did not converge */
  LVS_ELAPACK = 6, /* LAPACK reported a failure */
  LVS_ECAP = 7,    /* a dense allocation would exceed the configured cap */
  LVS_ENOTHERM = 8, /* a matrix that must be Hermitian is not */
  LVS_ESTOP = 9     /* a host's deadline passed, or the host interrupted the run */
} lvs_status;

/* ---- context ---------------------------------------------------------- */

/* Allocator with the contract of lua_Alloc: nsize == 0 frees ptr and returns
 * NULL; otherwise behaves like realloc(ptr, nsize) (osize is the old size,
 * or 0 when ptr is NULL). */
typedef void *(*lvs_alloc_fn)(void *ud, void *ptr, size_t osize, size_t nsize);

typedef struct lvs_ctx lvs_ctx;

/* CONSTRUCTOR. alloc may be NULL (malloc/realloc/free). Returns NULL only
 * when the context itself cannot be allocated. */
LVS_API lvs_ctx *lvs_ctx_new(lvs_alloc_fn alloc, void *ud);
/* DESTRUCTOR. Objects made in the context must be freed before it. */
LVS_API void lvs_ctx_free(lvs_ctx *ctx);
LVS_API int lvs_errcode(const lvs_ctx *ctx);         /* last status */
LVS_API const char *lvs_errmsg(const lvs_ctx *ctx);  /* owned by ctx */
LVS_API const char *lvs_strerror(int code);          /* static text */
LVS_API void lvs_clear_error(lvs_ctx *ctx);

/* Work fence: the core's long loops (Krylov products, series orders, sweep
 * points, propagation steps, effective-Hamiltonian orders, iterative solves)
 * poll it, and a dense LAPACK call whose cost cannot fit in the time left
 * (its flop count at LVS_FENCE_FLOPS, faster than this kind of machine
 * runs, so only hopeless calls are refused) is refused before it starts;
 * either stops with LVS_ESTOP ("deadline of 1 s exceeded in eigen",
 * "interrupted by the host in sweep"). interrupt may be set from any thread.
 * deadline: lvs_monotonic() seconds at which work stops (0: none); seconds:
 * its length, for the message. BORROWED by the context (NULL: no fence). */
typedef struct lvs_fence {
  volatile int interrupt;
  double deadline, seconds;
} lvs_fence;
#define LVS_FENCE_FLOPS 5e10
LVS_API void lvs_ctx_set_fence(lvs_ctx *ctx, lvs_fence *fence);
LVS_API double lvs_monotonic(void); /* seconds of CLOCK_MONOTONIC */
/* Cap, in bytes, on any single dense allocation (default
 * LVS_DEFAULT_DENSE_CAP). A request above it fails with LVS_ECAP. */
#define LVS_DEFAULT_DENSE_CAP ((size_t)4 << 30)
LVS_API void lvs_ctx_set_dense_cap(lvs_ctx *ctx, size_t bytes);
LVS_API size_t lvs_ctx_dense_cap(const lvs_ctx *ctx);

/* ---- matrices (ops) ----------------------------------------------------
 * A matrix is real or complex, stored dense (column-major) or sparse
 * (compressed columns); the library chooses. A square operator made by a
 * truncated basis (an oscillator) is stored on a padded space so that
 * products stay exact inside the visible block; rows/cols report the
 * visible size. */
typedef struct lvs_matrix lvs_matrix;

/* CONSTRUCTOR: rows x cols zeros, dense, real or complex. */
LVS_API int lvs_matrix_new(lvs_ctx *ctx, size_t rows, size_t cols, int cplx,
                           lvs_matrix **out);
/* CONSTRUCTOR: rows x cols zeros, sparse. */
LVS_API int lvs_matrix_new_sparse(lvs_ctx *ctx, size_t rows, size_t cols,
                                  int cplx, lvs_matrix **out);
LVS_API void lvs_matrix_free(lvs_matrix *m);
LVS_API size_t lvs_matrix_rows(const lvs_matrix *m);
LVS_API size_t lvs_matrix_cols(const lvs_matrix *m);
LVS_API int lvs_matrix_is_complex(const lvs_matrix *m);
LVS_API int lvs_matrix_is_sparse(const lvs_matrix *m);
LVS_API size_t lvs_matrix_nnz(const lvs_matrix *m); /* stored entries */
/* METHOD: element (i, j) of the visible block. */
LVS_API int lvs_matrix_get(const lvs_matrix *m, size_t i, size_t j,
                           double *re, double *im);
/* METHOD: set element (i, j); a nonzero im makes m complex. Refuses NaN/inf. */
LVS_API int lvs_matrix_set(lvs_matrix *m, size_t i, size_t j, double re,
                           double im);
LVS_API int lvs_matrix_copy(const lvs_matrix *a, lvs_matrix **out);
/* C = alpha*A + beta*B (complex scalars as re, im pairs). */
LVS_API int lvs_matrix_add(const double alpha[2], const lvs_matrix *a,
                           const double beta[2], const lvs_matrix *b,
                           lvs_matrix **out);
/* C = sum_k coef[k] * terms[k] in one pass (a long sum costs one merge, not
 * one copy of the running total per term). coef: count (re, im) pairs, or
 * NULL for all ones. terms[k] == NULL stands for the identity (on the
 * result's storage space; the terms must then be square). At least one term
 * must be an op. Same rules as lvs_matrix_add: the terms must have one
 * visible size; padded terms must come from one basis and a plain term of
 * the visible size is embedded in it; the result is complex when a term or
 * a coefficient is, dense when a term is dense or the merged sparse result
 * is full enough, and keeps the smallest slack and the largest band. The
 * terms are only read; *out is a new op (NULL on failure). Returns LVS_OK,
 * LVS_EINVAL (count 0, no op), LVS_EDIM (sizes, bases, identity of a
 * non-square op), LVS_ENOMEM or LVS_ECAP. */
LVS_API int lvs_matrix_sum(lvs_ctx *ctx, size_t count, const double (*coef)[2],
                           const lvs_matrix *const *terms, lvs_matrix **out);
/* C = A*B (exact inside the visible block for padded operators). */
LVS_API int lvs_matrix_mul(const lvs_matrix *a, const lvs_matrix *b,
                           lvs_matrix **out);
LVS_API int lvs_matrix_scale(const lvs_matrix *a, const double z[2],
                             lvs_matrix **out);
/* C = A + z*I. */
LVS_API int lvs_matrix_shift(const lvs_matrix *a, const double z[2],
                             lvs_matrix **out);
LVS_API int lvs_matrix_pow(const lvs_matrix *a, int k, lvs_matrix **out);
LVS_API int lvs_matrix_adj(const lvs_matrix *a, lvs_matrix **out);
/* Largest |A_ij - conj(A_ji)| over the visible block, and where (0-based). */
LVS_API double lvs_matrix_hermitian_defect(const lvs_matrix *a, size_t *i,
                                           size_t *j);
/* Largest |A_ij| over the stored entries (for a padded op these include the
 * hidden levels: a scale, at least the visible block's); NaN if one is NaN. */
LVS_API double lvs_matrix_max_abs(const lvs_matrix *a);
/* A plain (unpadded) copy of the visible block; dense if want_dense. */
LVS_API int lvs_matrix_visible(const lvs_matrix *a, int want_dense,
                               lvs_matrix **out);
/* BORROWED pointer to dense data of a plain dense matrix (NULL otherwise). */
LVS_API double *lvs_matrix_data(lvs_matrix *m);
/* Kronecker product A (x) B of two plain matrices. */
LVS_API int lvs_matrix_kron(const lvs_matrix *a, const lvs_matrix *b,
                            lvs_matrix **out);
/* CONSTRUCTOR: from nnz triplets (0-based rows ii, columns jj, values
 * re + i im; im may be NULL); duplicates are summed. */
LVS_API int lvs_matrix_from_triplets(lvs_ctx *ctx, size_t rows, size_t cols, size_t nnz,
                                     const size_t *ii, const size_t *jj, const double *re,
                                     const double *im, lvs_matrix **out);
/* y = A x on the visible block; x, y of length cols/rows, complex
 * interleaved when cplx (A complex requires cplx). */
LVS_API int lvs_matrix_apply(const lvs_matrix *a, int cplx, const double *x,
                             double *y);

/* ---- bases ------------------------------------------------------------- */
typedef struct lvs_basis lvs_basis;

typedef enum {
  LVS_BASIS_PLAIN = 0,
  LVS_BASIS_OSCILLATOR = 1,
  LVS_BASIS_SPIN = 2,
  LVS_BASIS_PRODUCT = 3,
  LVS_BASIS_CUSTOM = 4, /* made by a recipe from its own matrices */
  LVS_BASIS_BOX = 5,    /* particle in a box (box.c) */
  LVS_BASIS_ROTOR = 6,  /* rigid rotor |J M> (rotor.c) */
  LVS_BASIS_CHARGE = 7  /* charge states |n>, n = -N..N (charge.c) */
} lvs_basis_kind;

#define LVS_DEFAULT_PAD 16 /* extra oscillator levels kept for exact products */

LVS_API int lvs_basis_plain(lvs_ctx *ctx, size_t n, lvs_basis **out);
/* Oscillator: number states n = 0..N-1, hbar = m = omega = 1. */
LVS_API int lvs_basis_oscillator(lvs_ctx *ctx, size_t n, size_t pad,
                                 lvs_basis **out);
/* Spin S given as twoS = 2S >= 1; states m = S, S-1, ..., -S. */
LVS_API int lvs_basis_spin(lvs_ctx *ctx, int twoS, lvs_basis **out);
/* Product of count bases (copied). */
LVS_API int lvs_basis_product(lvs_ctx *ctx, const lvs_basis *const *sites,
                              size_t count, lvs_basis **out);
LVS_API void lvs_basis_free(lvs_basis *b);
LVS_API size_t lvs_basis_dim(const lvs_basis *b);
LVS_API lvs_basis_kind lvs_basis_kind_of(const lvs_basis *b);
LVS_API size_t lvs_basis_sites(const lvs_basis *b);
LVS_API const lvs_basis *lvs_basis_site(const lvs_basis *b, size_t i);
LVS_API size_t lvs_basis_nlabels(const lvs_basis *b);
LVS_API const char *lvs_basis_label_name(const lvs_basis *b, size_t k);
/* label k of state s (0-based) */
LVS_API double lvs_basis_label(const lvs_basis *b, size_t s, size_t k);
/* 1 and *idx (0-based) for the first state whose nlabels labels equal
 * want[] (within 1e-9), 0 when none does */
LVS_API int lvs_basis_find(const lvs_basis *b, const double *want, size_t *idx);
/* The named standard operator of a basis ("x", "p", "number", "lower",
 * "raise"; "Sx", "Sy", "Sz", "Sp", "Sm"; "identity"). site is 0 for a
 * single basis, or 1..sites for a site of a product. */
LVS_API int lvs_basis_op(const lvs_basis *b, size_t site, const char *name,
                         lvs_matrix **out);
/* A user's matrix m (plain, the size of site `site`, 1-based) on that site
 * of a product: I (x) m (x) I. The site may not be padded (an oscillator:
 * use its own operators). LVS_EINVAL, LVS_ERANGE, LVS_EDIM. */
LVS_API int lvs_basis_place(const lvs_basis *b, size_t site, const lvs_matrix *m, lvs_matrix **out);
/* An op on the basis from a plain visible-size matrix (embedded, padded
 * space zero). */
LVS_API int lvs_basis_embed(const lvs_basis *b, const lvs_matrix *plain,
                            lvs_matrix **out);

/* ---- site sums: ops of a product basis kept as terms ------------------- */
/* An op of a product basis (no padded site) held as a sum of terms
 * c * f_1 (x) f_2 (x) ... (one small factor per site it acts on), combined
 * by sums and products of the terms and written out into sparse storage
 * once by lvs_localsum_matrix (no full-size intermediate; localsum.c).
 * lvs_localsum_pays: 1 when the product is large enough for it to pay (and
 * has no padded site). lvs_localsum_site: the named op of site (1-based) as
 * lvs_basis_op names it ("identity": the identity term). _sum: sum_k
 * coef[k] terms[k] (coef NULL: ones; terms[k] NULL: the identity);
 * compatible: same site dimensions. Results hold at most
 * LVS_LOCALSUM_MAX_TERMS terms (LVS_ECAP above). _matrix: the sparse op
 * (dense only when small and full, as lvs_matrix_sum decides), entries
 * merged per column with exact zeros dropped. */
#define LVS_LOCALSUM_MAX_TERMS 65536
typedef struct lvs_localsum lvs_localsum;
LVS_API int lvs_localsum_pays(const lvs_basis *b);
LVS_API int lvs_localsum_site(const lvs_basis *b, size_t site, const char *name, lvs_localsum **out);
LVS_API int lvs_localsum_sum(lvs_ctx *ctx, size_t count, const double (*coef)[2],
                             const lvs_localsum *const *terms, lvs_localsum **out);
LVS_API int lvs_localsum_mul(const lvs_localsum *a, const lvs_localsum *b, lvs_localsum **out);
LVS_API int lvs_localsum_compatible(const lvs_localsum *a, const lvs_localsum *b);
/* the plain matrix m (the site's size) on site `site` (1-based) */
LVS_API int lvs_localsum_place(const lvs_basis *b, size_t site, const lvs_matrix *m, lvs_localsum **out);
LVS_API size_t lvs_localsum_terms(const lvs_localsum *s);
LVS_API size_t lvs_localsum_dim(const lvs_localsum *s);
LVS_API int lvs_localsum_is_complex(const lvs_localsum *s);
LVS_API lvs_ctx *lvs_localsum_ctx(const lvs_localsum *s);
LVS_API int lvs_localsum_matrix(const lvs_localsum *s, lvs_matrix **out);
LVS_API void lvs_localsum_free(lvs_localsum *s);

/* ---- exact spectra ----------------------------------------------------- */
/* Eigenvalues (ascending) and eigenvectors of a Hermitian op (visible
 * block). count = 0 means all; otherwise the lowest count. want_vectors = 0
 * skips vectors. w must hold count (or n) values; *vecs (n x count, columns
 * normalized, LAPACK's phase) is set when want_vectors. */
LVS_API int lvs_eigen(const lvs_matrix *h, size_t count, int want_vectors,
                      double *w, lvs_matrix **vecs);
#define LVS_DEFAULT_HERM_TOL 1e-10 /* relative Hermiticity tolerance */
/* lvs_eigen on symmetry sectors: comp[i] (0-based, every block number
 * 0..nb-1 used) is the block of state i; NULL finds the blocks as the
 * connected components of the sparsity graph (what lvs_eigen does for a
 * sparse op). Blocks are diagonalized separately and merged in ascending
 * order (ties: lower block first); an entry coupling two blocks is
 * LVS_EINVAL. A single sparse real tridiagonal block uses dstevr. */
LVS_API int lvs_eigen_sectors(const lvs_matrix *h, const size_t *comp, size_t count,
                              int want_vectors, double *w, lvs_matrix **vecs);

/* Eigenpairs with a choice of method (eigen.c, krylov.c): the lowest count
 * levels, or the count levels nearest `near` (values still ascending).
 * Symmetry sectors (comp as in lvs_eigen_sectors, or NULL: the connected
 * components of a sparse op) are solved one by one, each by LAPACK (dense
 * copy of the sector) or by ARPACK (implicitly restarted Lanczos for a real
 * op, Arnoldi for a complex one; shift-invert with a UMFPACK sparse LU of
 * H - near for `near`). LVS_EIGEN_AUTO takes ARPACK for a sparse sector of
 * more than LVS_KRYLOV_MIN_DIM (200) states when count <= size/8, LAPACK
 * otherwise; LVS_EIGEN_KRYLOV takes ARPACK for every sector where it can
 * (count + 2 <= size), LVS_EIGEN_DENSE never. Every dense request is
 * checked against the dense cap before any work. Errors: LVS_ENOCONV (not
 * converged: names tol, restarts, ncv), LVS_EINVAL (near outside the
 * Gershgorin range of the op, or on a level: H - near singular),
 * LVS_ENOTHERM, LVS_ECAP. opts may be NULL (all defaults). ARPACK is not
 * reentrant: Krylov solves from several threads take turns (one lock). */
typedef enum { LVS_EIGEN_AUTO = 0, LVS_EIGEN_DENSE = 1, LVS_EIGEN_KRYLOV = 2 } lvs_eigen_method;
#define LVS_KRYLOV_MIN_DIM 200
typedef struct {
  int method;          /* lvs_eigen_method */
  int has_near;        /* nonzero: levels nearest `near` */
  double near;
  double tol;          /* ARPACK's relative residual tolerance; 0 = machine epsilon 2^-52 */
  size_t maxiter;      /* ARPACK restarts; 0 = max(1000, 10 n) */
  size_t ncv;          /* Lanczos/Arnoldi basis size; 0 = max(2 count + 1, 20) */
  const double *start; /* start vector (n values, 2n complex interleaved) or NULL:
                          a fixed pseudo-random one; restricted to each sector */
  struct lvs_eigen_stats *stats; /* NULL, or added to: what the solve cost */
  int hermitian;       /* nonzero: the caller vouches that the op is Hermitian
                          (checked once for a family, say), no check here */
} lvs_eigen_opts;
/* Counts a solve adds to (the caller zeroes them first): sectors of more
 * than one state solved by ARPACK and by LAPACK, products with H (or
 * solves with H - near), ARPACK restarts (summed over sectors). */
typedef struct lvs_eigen_stats {
  size_t krylov_sectors, dense_sectors, products, restarts;
} lvs_eigen_stats;
LVS_API int lvs_eigen_ex(const lvs_matrix *h, const size_t *comp, size_t count, int want_vectors,
                         const lvs_eigen_opts *opts, double *w, lvs_matrix **vecs);

/* ---- dynamic polarizability (polar.c) ---------------------------------
 * alpha(omega) of level `level` (0-based, ascending energies) of H0 in a
 * field coupled by the Hermitian D:
 *   sum_m |D_mn|^2 [1/(E_m - E_n - omega - i width/2) + 1/(E_m - E_n + omega + i width/2)]
 * over the states outside the level, at nw frequencies (re, im: nw each).
 * path 0: automatic (the spectral sum over every eigenpair up to 4000
 * states or for a dense H0; above, for a sparse H0, Dalgarno-Lewis solves
 * with the reduced resolvent, real omega and a single level only), 1: the
 * spectral sum, 2: the solves. info: the level's energy, the first
 * resonance |E_m - E_n| that D reaches (spectral; the solves path gives the
 * nearest other level found, a lower bound) and the number of poles.
 * LVS_EINVAL for omega on a pole without width, a degenerate level on the
 * solves path, a width on the solves path. */
typedef struct {
  double energy, first_pole;
  size_t poles;
  int path; /* 0 spectral, 1 solves */
} lvs_polar_info;
LVS_API int lvs_polarizability(const lvs_matrix *h0, const lvs_matrix *d, size_t level, size_t nw,
                               const double *omegas, double width, int path, double *re, double *im,
                               lvs_polar_info *info);
/* The frequencies in [from, to] where levels la and lb (0-based) have equal
 * polarizabilities (alpha_a - alpha_b sampled on `steps` intervals cut at
 * every pole of either level, each sign change refined by bisection to the
 * last bit), ascending, at most cap of them into out, their count in *nout.
 * Every eigenpair of H0 (dense cap). */
LVS_API int lvs_polar_magic(const lvs_matrix *h0, const lvs_matrix *d, size_t la, size_t lb, double from, double to,
                            size_t steps, double *out, size_t cap, size_t *nout);

/* ---- sweeps of a coupling or a field (sweep.c) ------------------------
 * Lowest count levels of H(p) = H0 + p V on p_k = from + (to-from) k/steps,
 * k = 0..steps (1 <= steps <= 1e6), computed by `threads` threads (0 = 2;
 * the numbers do not depend on it), tracked by eigenvector overlap (level
 * a, 0-based, is the a-th lowest at `from`). Crossings are refined local
 * minima of adjacent gaps: avoided = 1 for a finite gap, 0 for a true
 * crossing (gap ~ 0); i < j are tracked levels, 0-based. */
/* H(p) of a family: fill out (dense n x n column-major visible block, complex
 * interleaved when the sweep is complex); nonzero + msg on failure. Called
 * from the thread that called lvs_sweep_new only. */
typedef int (*lvs_sweep_family_fn)(void *ud, double p, double *out, char *msg, size_t msglen);
typedef struct {
  const lvs_matrix *h0, *v; double from, to; size_t steps, count; int threads;
  int series_order;    /* > 0: RS series energies (series.c) beside the exact ones */
  const char *journal; /* NULL: none; else base path B: journal B.part (resumed),
                          shard parts B.part.K-of-N (read by a whole run) */
  size_t shard, shards; /* shards > 0: compute only points k = shard-1 mod shards
                          (shard 1-based) into B.part.K-of-N; the result is partial */
  int merge_only;      /* every point must come from B.part or a part file */
  void (*progress)(void *ud, size_t done, size_t total); /* from any thread, serialized */
  void *progress_ud;
  lvs_sweep_family_fn family; /* non-NULL: H(p) = family(p); h0 = H(from) and
                          v = H(to) then (size, kind, journal hash); no series */
  void *family_ud;
  int method;          /* lvs_sweep_method (0 = LVS_SWEEP_AUTO) */
} lvs_sweep_spec;
/* How the points are solved. AUTO: the Krylov path for a sparse model (H0
 * and V stored sparse, no family) of more than LVS_KRYLOV_MIN_DIM states
 * with 8 count <= n that the band path does not take; else the band path
 * for a real model with 1 <= half-bandwidth kd and 4 kd <= n (n >= 16); else
 * dense. DENSE: lvs_eigen on a dense H(p). BAND: the band path (real, no
 * family, n >= 16; kd of at least 1). KRYLOV: lvs_eigen_ex with
 * LVS_EIGEN_KRYLOV on a sparse H(p) (no dense copy of the model; AUTO's
 * Krylov path passes LVS_EIGEN_AUTO, so small sectors go dense); runs of
 * LVS_SWEEP_KRYLOV_RUN consecutive grid points are warm-started from the
 * point before, and shards take whole runs (run r to shard r mod N + 1). */
typedef enum { LVS_SWEEP_AUTO = 0, LVS_SWEEP_DENSE = 1, LVS_SWEEP_BAND = 2, LVS_SWEEP_KRYLOV = 3 } lvs_sweep_method;
#define LVS_SWEEP_KRYLOV_RUN 16
typedef struct { double at, gap; size_t i, j; int avoided; } lvs_sweep_crossing;
typedef struct lvs_sweep lvs_sweep;
LVS_API int lvs_sweep_new(lvs_ctx *ctx, const lvs_sweep_spec *spec, lvs_sweep **out);
LVS_API void lvs_sweep_free(lvs_sweep *s);
LVS_API size_t lvs_sweep_points(const lvs_sweep *s); /* steps + 1 */
LVS_API size_t lvs_sweep_count(const lvs_sweep *s);
LVS_API double lvs_sweep_param(const lvs_sweep *s, size_t k);
LVS_API const double *lvs_sweep_level(const lvs_sweep *s, size_t level); /* BORROWED, points values */
LVS_API size_t lvs_sweep_ncrossings(const lvs_sweep *s);
LVS_API const lvs_sweep_crossing *lvs_sweep_crossing_at(const lvs_sweep *s, size_t k); /* BORROWED */
LVS_API double lvs_sweep_min_overlap(const lvs_sweep *s); /* smallest accepted overlap */
LVS_API int lvs_sweep_path(const lvs_sweep *s); /* path taken: LVS_SWEEP_DENSE, _BAND or _KRYLOV */
LVS_API const double *lvs_sweep_series(const lvs_sweep *s, size_t level); /* BORROWED or NULL */
LVS_API int lvs_sweep_series_order(const lvs_sweep *s); /* 0: no series */
LVS_API int lvs_sweep_is_partial(const lvs_sweep *s, size_t *done); /* a shard: points in its part */
/* delete the journal and part files the sweep read (after the final write) */
LVS_API int lvs_sweep_remove_journals(lvs_sweep *s);
/* parameter name (default "p"), its unit and the energy unit (NULL: keep),
 * used in the headers of written files */
LVS_API int lvs_sweep_set_labels(lvs_sweep *s, const char *param, const char *param_unit, const char *energy_unit);
/* CSV (header p,E1,E2,...[,E1_series,...] after a units comment), written
 * with lvs_write_file; a path ending in .json is refused (the Lua layer
 * writes JSON through a JSON library). */
LVS_API int lvs_sweep_write(const lvs_sweep *s, const char *path);
/* the files' model and units line, e.g. "H(p) = H0 + p V; energies in GHz" */
LVS_API void lvs_sweep_about(const lvs_sweep *s, char *about, size_t size);
/* Write len bytes to path atomically: to path.tmp.PID, flushed and fsync'd, then
 * renamed over path; on any failure path is unchanged and no .tmp is left. */
LVS_API int lvs_write_file(lvs_ctx *ctx, const char *path, const void *data, size_t len);
/* ---- effective Hamiltonians (effective.c) ---------------------------
 * Canonical Van Vleck / Schrieffer-Wolff H_eff of a group of levels of H0
 * (0-based, ascending H0 energy) under lambda*V to order 1..50, by the Bloch
 * wave operator and des Cloizeaux symmetrization; terms d x d in H0's
 * eigenbasis (a diagonal H0 keeps its basis states). */
typedef struct lvs_effective lvs_effective;
LVS_API int lvs_effective_new(const lvs_matrix *h0, const lvs_matrix *v, const size_t *levels, size_t nlevels, int order, lvs_effective **out);
/* as lvs_effective_new; flags LVS_EFFECTIVE_DENSE: take the dense eigenbasis
 * path even when H0 is diagonal (O(n^2) memory; for checking the sparse path) */
#define LVS_EFFECTIVE_DENSE 1u
LVS_API int lvs_effective_new_ex(const lvs_matrix *h0, const lvs_matrix *v, const size_t *levels, size_t nlevels,
                                 int order, unsigned flags, lvs_effective **out);
LVS_API void lvs_effective_free(lvs_effective *e);
LVS_API size_t lvs_effective_dim(const lvs_effective *e);
LVS_API int lvs_effective_order(const lvs_effective *e);
LVS_API const size_t *lvs_effective_levels(const lvs_effective *e); /* BORROWED, ascending */
/* basis state (0-based) of group member i when H0 is diagonal, else SIZE_MAX */
LVS_API size_t lvs_effective_state(const lvs_effective *e, size_t i);
/* level (0-based, ascending energy, ties in basis order) of a basis state of a
 * diagonal H0; LVS_EINVAL when H0 is not diagonal */
LVS_API int lvs_level_of_state(const lvs_matrix *h0, size_t state, size_t *level);
/* all n eigenvalues of H0 into w (n entries), ascending; a diagonal H0 is
 * sorted without an eigensolver. LVS_ENOTHERM / LVS_EINVAL as lvs_eigen */
LVS_API int lvs_effective_spectrum(const lvs_matrix *h0, double *w);
LVS_API int lvs_effective_term(const lvs_effective *e, int k, lvs_matrix **out);
/* sum_k lambda^k term(k) through order (order < 0: all) */
LVS_API int lvs_effective_at(const lvs_effective *e, double lambda, int order, lvs_matrix **out);
LVS_API const char *lvs_effective_warnings(const lvs_effective *e); /* "" when none; owned */
/* the smallest gap between the group and the levels outside, and the
 * coupling max|V_am| the gap warning judges it by (at lambda: |lambda| x it) */
LVS_API void lvs_effective_gap(const lvs_effective *e, double *gap, double *coupling);
/* ---- perturbation series (series.c) ----------------------------------
 * RS series of the levels of H0 under lambda*V to order K (1..1000),
 * degenerate groups (relative tolerance degen_tol on H0's spectrum) lifted
 * by a recursive Bloch reduction. Levels are 0-based in ascending
 * unperturbed energy, inside a split group by ascending correction.
 * levels/nlevels select levels to compute (nlevels = 0: all). States are
 * in the original basis, complex interleaved, length dim, assembled on
 * request; a member split from its group at order s has states to order
 * K - s (state_orders). split_order: 0 alone, k split at order k, -1
 * never split within the order. */
typedef struct lvs_series lvs_series;
#define LVS_SERIES_NORMALIZED 1 /* flags: normalized states (default: intermediate normalization) */
#define LVS_SERIES_NO_STATES 2  /* flags: energies only, no state corrections kept (less memory) */
LVS_API int lvs_series_new(const lvs_matrix *h0, const lvs_matrix *v, int order, const size_t *levels, size_t nlevels, double degen_tol, int flags, lvs_series **out);
/* Model spaces of nearly degenerate levels (mspace.c's head comment has the
 * rule): groups = LVS_GROUPS_AUTO joins exact groups G, H of H0 when
 * |E_G - E_H| < near_factor * lambda_max * kappa_GH (kappa: the coupling
 * block's Frobenius norm over sqrt of the smaller group size), closures of
 * more than near_max levels (or of every level) are not formed (see
 * lvs_series_notes); LVS_GROUPS_EXACT: exact degeneracies only;
 * LVS_GROUPS_HAND: nhand groups, group h has hand_len[h] levels (0-based)
 * at hand + sum of the earlier lengths, each a union of exact groups.
 * lvs_series_opts_init sets degen_tol 1e-10, AUTO, lambda_max 1,
 * near_factor 4, near_max 8. lvs_series_new is lvs_series_new_ex with
 * those defaults. */
#define LVS_GROUPS_AUTO 0
#define LVS_GROUPS_EXACT 1
#define LVS_GROUPS_HAND 2
typedef struct {
  double degen_tol;
  int flags;
  int groups;
  double lambda_max, near_factor;
  size_t near_max;
  const size_t *hand, *hand_len;
  size_t nhand;
} lvs_series_opts;
LVS_API void lvs_series_opts_init(lvs_series_opts *o);
LVS_API int lvs_series_new_ex(const lvs_matrix *h0, const lvs_matrix *v, int order, const size_t *levels,
                              size_t nlevels, const lvs_series_opts *o, lvs_series **out);
/* lvs_series_at summed to order k (0..K); for a member of a model space the
 * matching eigenvalue (members ranked by ascending value) of the space's
 * order-k effective Hamiltonian at lambda (lvs_series_at: k = K) */
LVS_API int lvs_series_at_order(const lvs_series *s, size_t level, double lambda, int k, double *e);
LVS_API size_t lvs_series_nspaces(const lvs_series *s);
LVS_API int lvs_series_space_of(const lvs_series *s, size_t level); /* model space index, or -1 */
/* members (BORROWED, 0-based ascending), size, order of its terms (min(K, 50)),
 * chosen by hand, why it was formed (BORROWED text); any pointer may be NULL */
LVS_API int lvs_series_space(const lvs_series *s, size_t i, const size_t **members, size_t *d, int *order, int *hand,
                             const char **why);
/* term k of the space's effective Hamiltonian (des Cloizeaux form), d x d in H0's eigenbasis */
LVS_API int lvs_series_space_term(const lvs_series *s, size_t i, int k, lvs_matrix **out);
LVS_API const char *lvs_series_notes(const lvs_series *s); /* "" when none; BORROWED */
LVS_API void lvs_series_grouping(const lvs_series *s, double *lambda_max, double *near_factor);
/* the spacing scale of H0's levels: the median of the gaps above rounding
 * between its known levels (0: none); degen_tol is relative to it */
LVS_API double lvs_series_spacing(const lvs_series *s);
LVS_API int lvs_series_groups_mode(const lvs_series *s); /* LVS_GROUPS_* */
/* the nearest exact group left outside the level's own within the joining
 * window: its first level (SIZE_MAX: none), gap and coupling kappa (NaN:
 * not looked at -- a member of a model space, hand-chosen groups, or a few
 * levels solved by the bordered dense route) */
LVS_API int lvs_series_neighbour(const lvs_series *s, size_t level, size_t *nb, double *gap, double *kappa);
LVS_API void lvs_series_free(lvs_series *s);
LVS_API size_t lvs_series_dim(const lvs_series *s);
LVS_API int lvs_series_order(const lvs_series *s);
LVS_API double lvs_series_vnorm(const lvs_series *s); /* max column 1-norm of V */
LVS_API int lvs_series_has(const lvs_series *s, size_t level);
LVS_API int lvs_series_energy(const lvs_series *s, size_t level, int k, double *e);
LVS_API int lvs_series_at(const lvs_series *s, size_t level, double lambda, double *e);
LVS_API int lvs_series_info(const lvs_series *s, size_t level, size_t *group, int *split_order, double *min_denominator, int *state_orders);
LVS_API int lvs_series_state(const lvs_series *s, size_t level, int k, double *psi);
/* basis state of the level's unperturbed state when H0 is diagonal (*pure:
 * exactly that state, else its largest component); SIZE_MAX otherwise */
/* STATIC name of how the orders were solved: "diagonal" (diagonal H0),
 * "eigenbasis" (H0 diagonalized densely), "bordered dense" (a few levels of a
 * dense real H0), "bordered LU" or "MINRES" (the sparse path: levels from the
 * Krylov path, each order by a bordered sparse LU or by MINRES on the
 * projected H0); *solves and *iters (may be NULL) get the sparse path's
 * solves and MINRES iterations. */
LVS_API const char *lvs_series_solver(const lvs_series *s, size_t *solves, size_t *iters);
LVS_API size_t lvs_series_basis_state(const lvs_series *s, size_t level, int *pure);
/* ---- transitions under time-dependent perturbations (transition.c) -----
 * hbar = 1. H(t) = H0 + pulse(t) V, or H0 + W(t) from a callback. Amplitudes
 * are in the eigenbasis of H0 (levels 0-based by ascending energy),
 * interaction picture, c(t0) = e_from. */
typedef struct lvs_pulse lvs_pulse;
/* CONSTRUCTORS: amplitude*exp(-(t-center)^2/(2 width^2)); amplitude on
 * [start, stop]; amplitude*sin(omega t + phase)*envelope(t) (envelope may be
 * NULL = 1, copied); from -> to linearly over [start, stop], constant
 * outside; a + b (both copied). */
LVS_API int lvs_pulse_gaussian(lvs_ctx *ctx, double amplitude, double center, double width, lvs_pulse **out);
LVS_API int lvs_pulse_square(lvs_ctx *ctx, double amplitude, double start, double stop, lvs_pulse **out);
LVS_API int lvs_pulse_sine(lvs_ctx *ctx, double amplitude, double omega, double phase, const lvs_pulse *envelope,
                           lvs_pulse **out);
LVS_API int lvs_pulse_ramp(lvs_ctx *ctx, double from, double to, double start, double stop, lvs_pulse **out);
LVS_API int lvs_pulse_sum(const lvs_pulse *a, const lvs_pulse *b, lvs_pulse **out);
LVS_API int lvs_pulse_copy(const lvs_pulse *p, lvs_pulse **out);
LVS_API void lvs_pulse_free(lvs_pulse *p);
LVS_API double lvs_pulse_eval(const lvs_pulse *p, double t);
/* Where the pulse is nonzero (a Gaussian: center +- 12 widths); infinite
 * ends when it never stops. */
LVS_API void lvs_pulse_support(const lvs_pulse *p, double *lo, double *hi);

/* Callbacks return 0 on success. field_fn fills v with W(t), n x n complex
 * interleaved, column-major, in the basis of H0 as given. */
typedef int (*lvs_pulse_fn)(void *ud, double t, double *value);
typedef int (*lvs_field_fn)(void *ud, double t, double *v);
typedef struct {
  lvs_pulse_fn pulse_fn; /* a scalar pulse from a callback, or NULL */
  lvs_field_fn field_fn; /* the whole W(t) from a callback, or NULL */
  void *ud;
} lvs_transition_source;
typedef struct {
  const lvs_matrix *h0;    /* Hermitian */
  const lvs_matrix *v;     /* Hermitian, with pulse or src.pulse_fn */
  const lvs_pulse *pulse;  /* or NULL */
  lvs_transition_source src;
  size_t from;             /* 0-based level of H0 */
  double t0, t1;           /* t0 = -inf / t1 = +inf allowed for a pulse that ends */
  int order;               /* 1 or 2 */
  size_t steps;            /* grid intervals (rounded up to a multiple of 4); 0 = from the problem, refined */
} lvs_transition_spec;
typedef struct lvs_transition lvs_transition;
/* CONSTRUCTOR: perturbative amplitudes to every level. */
LVS_API int lvs_transition_new(lvs_ctx *ctx, const lvs_transition_spec *spec, lvs_transition **out);
/* How tr:exact propagates. method: LVS_EXACT_AUTO (RK4 in the interaction
 * picture for pulse(t) * V, Magnus-4 for a V(t) callback), LVS_EXACT_RK4,
 * LVS_EXACT_MAGNUS4. tol = 0: steps fixed (0 = the finer of the grid of tr and
 * 0.2 rad per step of the coupled Bohr frequencies plus carriers, at most
 * 2^18), error from steps/2; tol > 0: from steps (0 = estimated from the Bohr frequencies
 * V couples) the count grows (x2, then as the error constant predicts,
 * x2..x16) until the Richardson estimate |c_m - c_m'|/((m/m')^4 - 1) of
 * every amplitude is <= tol, up to LVS_EXACT_MAX_STEPS (then LVS_ENOCONV). */
enum { LVS_EXACT_AUTO = 0, LVS_EXACT_RK4 = 1, LVS_EXACT_MAGNUS4 = 2 };
#define LVS_EXACT_MAX_STEPS (1 << 24)
typedef struct {
  int method;
  size_t steps;
  double tol;
  size_t max_steps; /* with tol: the cap (0 = LVS_EXACT_MAX_STEPS) */
} lvs_exact_spec;
/* CONSTRUCTOR: the same transition by propagating the full H(t) (es NULL:
 * defaults). src supplies callbacks again (the C pulse is kept by tr). Adds
 * a warning to tr when the two disagree. */
LVS_API int lvs_transition_exact(lvs_transition *tr, const lvs_transition_source *src, const lvs_exact_spec *es,
                                 lvs_transition **out);
/* steps used: the grid of a perturbative result, the final count of an exact one */
LVS_API size_t lvs_transition_steps(const lvs_transition *tr);
LVS_API void lvs_transition_free(lvs_transition *tr);
LVS_API size_t lvs_transition_dim(const lvs_transition *tr);
LVS_API int lvs_transition_order(const lvs_transition *tr); /* 0 for exact */
/* amplitude summed through order (order < 0: all computed orders) */
LVS_API int lvs_transition_amplitude(const lvs_transition *tr, size_t to, int order, double *re, double *im);
LVS_API int lvs_transition_error(const lvs_transition *tr, size_t to, double *err);
LVS_API const char *lvs_transition_warnings(const lvs_transition *tr); /* "" when none; owned */
LVS_API const double *lvs_transition_energies(const lvs_transition *tr); /* BORROWED */
/* ---- Fermi's golden rule (golden.c) --------------------------------------
 * hbar = 1. Rate from a level at `energy` into a band: constant V gives
 * 2 pi |V|^2 rho(E); a harmonic V(t) = F e^{-iwt} + F^+ e^{iwt} gives
 * 2 pi |F|^2 rho(E + w) (absorption) or rho(E - w) (emission). Give exactly
 * one density of states: has_rho with rho, dos_fn (returns 0 on success), or
 * a band of nband levels, each broadened by a normalised Lorentzian (half
 * width `broadening`) or Gaussian (standard deviation); band_coupling (or
 * NULL: `coupling` for every level) gives |V_k| per level. Warnings (rate
 * against band width, broadening against spacing, recurrence) go into
 * result.warning ("" when none). Returns LVS_EINVAL for bad input. */
enum { LVS_GOLDEN_CONSTANT = 0, LVS_GOLDEN_ABSORPTION = 1, LVS_GOLDEN_EMISSION = 2 };
enum { LVS_BAND_LORENTZIAN = 0, LVS_BAND_GAUSSIAN = 1 };
typedef int (*lvs_dos_fn)(void *ud, double energy, double *rho);
typedef struct {
  int process;          /* LVS_GOLDEN_* */
  double coupling;      /* |V_fi|, or |F_fi| for a harmonic perturbation */
  double energy;        /* E_i */
  double omega;         /* > 0 for absorption and emission */
  int has_rho;          /* rho below is the density of states */
  double rho;
  lvs_dos_fn dos_fn;    /* or rho(E) from a callback */
  void *ud;
  const double *band;   /* or nband discrete levels (BORROWED for the call) */
  size_t nband;
  const double *band_coupling; /* |V_k| per band level, or NULL */
  double broadening;
  int shape;            /* LVS_BAND_* */
} lvs_golden_spec;
typedef struct {
  double rate;          /* Gamma */
  double rho;           /* density of states used (the broadened sum for a band) */
  double final_energy;  /* E_i, E_i + w or E_i - w */
  double spacing, bandwidth; /* of a band (mean spacing, max - min), else 0 */
  char warning[512];
} lvs_golden_result;
LVS_API int lvs_golden_rate(lvs_ctx *ctx, const lvs_golden_spec *spec, lvs_golden_result *out);

/* ---- custom bases and hydrogen in a Coulomb-Sturmian basis (basis.c, hydrogen.c)
 * A custom basis (kind LVS_BASIS_CUSTOM): n states, nlab labels each (names
 * copied, at most 15 characters; labels state-major, n * nlab values,
 * copied), and named operators attached as copies of plain n x n matrices
 * (lvs_basis_op hands them out; a product embeds them per site). */
LVS_API int lvs_basis_custom(lvs_ctx *ctx, size_t n, size_t nlab, const char *const *names,
                             const double *labels, lvs_basis **out);
LVS_API int lvs_basis_custom_op(lvs_basis *b, const char *name, const lvs_matrix *op);
/* Hydrogen-like atom (atomic units, charge Z) in Coulomb-Sturmian (Laguerre)
 * functions r^(l+1) e^(-kappa r) L_k^(2l+1)(2 kappa r), k = 0..nfun-1, for
 * l = 0..lmax. CONSTRUCTOR: a custom basis of the eigenstates of the
 * field-free H0 inside that space, with labels n (l + 1 + rank in energy
 * inside its l, m block: the principal number for bound states, a pseudo
 * number above), l, m, ordered by ascending energy (ties by l, then m).
 * Operators: "H0" (diagonal), "z", "r", "r2" (= r^2), "L2", "Lz", and
 * with every m also "x" and "y" (complex) (exact inside the space: no
 * truncation at the edge). all_m = 1 takes m = -l..l for every
 * l; otherwise every l >= |m|. Radial functions are positive near r = 0.
 * Returns LVS_EINVAL for lmax < 0 or > 200, nfun < 1 or > 2000, kappa or Z
 * not positive and finite, |m| > lmax. */
typedef struct {
  int lmax;      /* largest l */
  int nfun;      /* radial functions per l */
  double kappa;  /* Sturmian exponent (1/bohr) */
  double Z;      /* nuclear charge (1 for hydrogen) */
  int m;         /* fixed m when all_m == 0 */
  int all_m;
} lvs_coulomb_spec;
LVS_API int lvs_coulomb_basis(lvs_ctx *ctx, const lvs_coulomb_spec *spec, lvs_basis **out);

/* ---- particle in a box, rigid rotor, Clebsch-Gordan (box.c, rotor.c) ----
 * Box: states n = 1..N of a particle of mass `mass` in an infinite square
 * well of width `width` (hbar = 1), psi_n = sqrt(2/L) sin(n pi (x - x0)/L),
 * x in [x0, x0 + L] with x0 = 0, or x0 = -L/2 when centered. Operators
 * (lvs_basis_op): "H0" (n^2 pi^2/(2 m L^2), diagonal), "x", "p", "x2"
 * (= x^2, closed form; not the product of truncated x), "p2", "identity".
 * LVS_EINVAL for N < 1, width or mass not positive and finite; LVS_ECAP
 * for N > 100000. */
LVS_API int lvs_basis_box(lvs_ctx *ctx, size_t n, double width, double mass, int centered,
                          lvs_basis **out);
/* width, mass and left wall x0 of a box basis (any may be NULL); LVS_EINVAL
 * when b is not a box. */
LVS_API int lvs_box_params(const lvs_basis *b, double *width, double *mass, double *x0);
/* A real function sampled at n points x[] (the box's own coordinate),
 * values to fx[]; returns 0 on success, nonzero to abort (the caller keeps
 * its own reason). */
typedef int (*lvs_real_fn)(void *ud, size_t n, const double *x, double *fx);
/* f(A) = U f(Lambda) U^H of a Hermitian op (opfun.c): f is called once with
 * A's eigenvalues (all of them, ascending). A padded op (oscillator
 * operators) is taken on its whole stored space, so f(A) inside the kept
 * levels is that of the larger matrix; the result keeps the padding with
 * no exact padded level left (a product with it is refused). Dense result.
 * LVS_ENOTHERM, LVS_ECAP (dense cap), LVS_EINVAL when f fails or returns
 * NaN or inf. */
LVS_API int lvs_matrix_function(const lvs_matrix *a, lvs_real_fn f, void *ud, lvs_matrix **out);
#define LVS_DEFAULT_BOX_TOL 1e-12       /* relative to max|V| on the grid */
#define LVS_BOX_MAX_POINTS ((size_t)1 << 20) /* quadrature points per grid */
typedef struct {
  double tol;            /* 0 = LVS_DEFAULT_BOX_TOL */
  const double *breaks;  /* points inside the box where V jumps or kinks, or NULL */
  size_t nbreaks;
} lvs_box_quad;
/* CONSTRUCTOR: the plain dense N x N matrix <m|V|n> of V(x) given by f, by
 * composite Gauss-Legendre quadrature (16 points per panel, panels doubled
 * until two grids agree to tol * max|V|; the first grid has 16 max(N, 32)
 * points, so a feature much narrower than width/(16 max(N, 32)) can go
 * unseen: put break points around it; see box.c). opt may be NULL. *err
 * (may be NULL) gets the last grid difference, a bound on the error of
 * each element in practice. Returns LVS_EINVAL when f fails or returns NaN
 * or inf (the message names x), a break point is outside the box or the
 * basis is not a box; LVS_ENOCONV when the grid passes LVS_BOX_MAX_POINTS. */
LVS_API int lvs_box_potential(const lvs_basis *b, lvs_real_fn f, void *ud, const lvs_box_quad *opt,
                              lvs_matrix **out, double *err);
/* Rigid rotor (hbar = 1): states |J M>, J = Jmin..jmax, ordered by J, then
 * M from +J down to -J; all_m = 1 keeps every M (Jmin = 0), all_m = 0 keeps
 * only M = m (Jmin = |m|). Labels J, M. Operators: "J2" (J(J+1)), "Jz",
 * "cos" (cos theta, <J M|cos|J' M> from Clebsch-Gordan coefficients),
 * "cos2" (cos^2 theta, exact up to J = Jmax, unlike cos * cos), and
 * with every M: "Jp", "Jm", "Jx", "Jy" (Condon-Shortley phases), "identity".
 * LVS_EINVAL for jmax < 0 or |m| > jmax; LVS_ECAP for jmax > 2000. */
LVS_API int lvs_basis_rotor(lvs_ctx *ctx, int jmax, int all_m, int m, lvs_basis **out);
/* Charge basis (charge.c): states |n>, n = -N..N (1 <= N <= 1e6), label n,
 * ordered by n; operators "n", "n2" (n^2), "cos" (cos phi), "sin" (sin
 * phi, complex), "cos2" (cos 2 phi, exact up to the edge), "raise"
 * (e^{i phi}: |n> -> |n + 1>), "lower" (e^{-i phi}), "identity". */
LVS_API int lvs_basis_charge(lvs_ctx *ctx, long N, lvs_basis **out);
/* Clebsch-Gordan coefficient <j1 m1 j2 m2 | J M> (Condon-Shortley phase)
 * with every argument doubled (two_j1 = 2 j1, ...), by Racah's formula in
 * long double with log-gamma; 0 when M != m1 + m2 or the triangle rule
 * fails. Orthonormality sums hold to 1e-15 for j1 = j2 <= 20, 2e-13 at 30,
 * 2e-11 at 40, 3e-7 at 60 (the alternating sum cancels when all three j
 * are large; with one j small it stays near 1e-16). LVS_EINVAL for a
 * negative j, |m| > j, j + m not an integer; LVS_ERANGE for j > 1000. */
LVS_API int lvs_clebsch_gordan(lvs_ctx *ctx, int two_j1, int two_m1, int two_j2, int two_m2, int two_J,
                               int two_M, double *out);
/* Wigner 3j symbol (j1 j2 j3; m1 m2 m3), doubled arguments, from the CG
 * coefficient; same errors. */
LVS_API int lvs_wigner_3j(lvs_ctx *ctx, int two_j1, int two_j2, int two_j3, int two_m1, int two_m2,
                          int two_m3, double *out);

/* ---- structure, radial grids, linear-solve series (blocks.c, radial.c,
 * solve_series.c) ---------------------------------------------------------
 * Block assembly: blk is an nbr x nbc row-major grid of operators (NULL = a
 * zero block); every block row and column needs at least one operator to
 * fix its size. Result sparse (dense above 25% fill). Padded operators give
 * their visible block. */
LVS_API int lvs_matrix_blocks(lvs_ctx *ctx, size_t nbr, size_t nbc,
                              const lvs_matrix *const *blk, lvs_matrix **out);
/* Largest |i - j| over nonzero entries of the visible block. */
LVS_API int lvs_matrix_bandwidth(const lvs_matrix *m, size_t *band);
/* Haar-distributed random orthogonal n x n matrix (dense), from the QR
 * decomposition of a matrix of standard normal deviates with the signs of
 * R's diagonal moved into Q (Mezzadri 2007). The same seed gives the same
 * matrix. For checking that results do not depend on the basis. */
LVS_API int lvs_random_orthogonal(lvs_ctx *ctx, size_t n, uint64_t seed, lvs_matrix **out);

/* Finite-difference radial Hamiltonian H_l = -u''/2 + l(l+1)/(2r^2) - Z/r on
 * r_i = i rmax/(n+1), i = 1..n, u(0) = u(rmax) = 0 (tridiagonal, sparse),
 * and the diagonal operator r. Either output may be NULL. */
LVS_API int lvs_radial(lvs_ctx *ctx, size_t n, double rmax, int l, double charge,
                       lvs_matrix **h, lvs_matrix **r);
/* The same for nl channels l[0..nl-1] side by side: one block-diagonal H of
 * dimension nl n (channel c on indices c n .. c n + n - 1); r is one
 * channel's. */
LVS_API int lvs_radial_channels(lvs_ctx *ctx, size_t n, double rmax, const int *l, size_t nl,
                                double charge, lvs_matrix **h, lvs_matrix **r);
/* RS series of one non-degenerate level of a real symmetric sparse/banded H0
 * under lambda V to order 1..1000 by one banded solve per order
 * (Dalgarno-Lewis); needs one eigenpair of H0 (computed when state is
 * NULL: level is 0-based ascending). energy NAN: the Rayleigh quotient of
 * state. States psi(0..order-1) (E(order) needs no more), intermediate
 * normalization, unit psi(0). */
typedef struct { size_t level; const double *state; double energy; } lvs_dlseries_opts;
typedef struct lvs_dlseries lvs_dlseries;
LVS_API int lvs_dlseries_new(const lvs_matrix *h0, const lvs_matrix *v, int order,
                             const lvs_dlseries_opts *opts, lvs_dlseries **out);
LVS_API void lvs_dlseries_free(lvs_dlseries *s);
LVS_API size_t lvs_dlseries_dim(const lvs_dlseries *s);
LVS_API int lvs_dlseries_order(const lvs_dlseries *s);
LVS_API size_t lvs_dlseries_band(const lvs_dlseries *s);    /* bandwidth of H0 used */
LVS_API double lvs_dlseries_gap(const lvs_dlseries *s);     /* to nearest level (bands wider than 1); else NAN */
LVS_API const char *lvs_dlseries_solver(const lvs_dlseries *s); /* "twisted", "dgttrf", "dgbtrf", ... */
LVS_API int lvs_dlseries_energy(const lvs_dlseries *s, int k, double *e); /* k = 0..order */
LVS_API const double *lvs_dlseries_state(const lvs_dlseries *s, int k);  /* BORROWED, n values; NULL if k >= order */
/* sum_k lambda^k E(k) through order (order < 0: all) */
LVS_API int lvs_dlseries_at(const lvs_dlseries *s, double lambda, int order, double *e);

/* ---- units: CODATA 2018 constants and conversions (units.c) ------------- */
/* Source: Tiesinga, Mohr, Newell, Taylor, "CODATA recommended values of the
 * fundamental physical constants: 2018", Rev. Mod. Phys. 93, 025010 (2021). */
typedef struct {
  const char *name;   /* e.g. "mu_B", "E_h", "alpha" */
  double value;       /* SI unless `unit` says otherwise */
  double uncertainty; /* standard uncertainty in the same unit; 0 = exact */
  const char *unit;   /* e.g. "J T^-1"; "" = dimensionless */
  const char *about;  /* the CODATA quantity name */
} lvs_constant;
/* STATIC table, entries from i = 0; NULL past the end. Never fails. */
LVS_API const lvs_constant *lvs_constant_at(size_t i);
/* STATIC entry by name, NULL if unknown (or name NULL). */
LVS_API const lvs_constant *lvs_constant_find(const char *name);
/* the i-th unit name from 0 (STATIC), its kind in *kind if kind != NULL:
 * "energy" (hartree, eV, cm^-1, Hz..THz, rad/s, K, and T/mT/uT/G as mu_B B),
 * "electric field" (V/m .. au_field), "length", "magnetic field"
 * (tesla, gauss, au_bfield), "dipole" (D = debye = 1e-21/c C m, ea0 =
 * au_dipole, C*m); NULL past the end. */
LVS_API const char *lvs_unit_at(size_t i, const char **kind);
/* the kind of a unit name (STATIC string), NULL if unknown. */
LVS_API const char *lvs_unit_kind(const char *name);
/* *out = value expressed in `to` (same kind as `from`). LVS_EINVAL for an
 * unknown unit or different kinds (*out untouched). */
LVS_API int lvs_unit_convert(lvs_ctx *ctx, double value, const char *from, const char *to, double *out);

/* @@FEATURE-DECLARATIONS@@ (features add their sections above this line) */

/* ---- embedding --------------------------------------------------------- */
typedef struct lvs_host lvs_host;
/* CONSTRUCTOR: a Lua state with the standard libraries and levelshift
 * preloaded (require "levelshift" works, and the global `ls` is set when
 * LVS_HOST_GLOBAL is given). Returns NULL only when out of memory. */
#define LVS_HOST_GLOBAL 1
LVS_API lvs_host *lvs_host_new(int flags);
LVS_API void lvs_host_free(lvs_host *h);
/* Run a file or a string; returns 0 on success, nonzero on a Lua error
 * (message and traceback in lvs_host_error). */
LVS_API int lvs_host_dofile(lvs_host *h, const char *path);
LVS_API int lvs_host_dostring(lvs_host *h, const char *code, const char *name);
LVS_API const char *lvs_host_error(const lvs_host *h);
/* Fences for hosts that run untrusted scripts. */
#define LVS_HOST_SANDBOX 2 /* no io, os, debug, no C modules, text chunks only */
typedef struct {
  int flags;                        /* LVS_HOST_GLOBAL | LVS_HOST_SANDBOX */
  size_t memory_cap;                /* bytes for Lua and the core together; 0 = none */
  unsigned long long instruction_budget; /* VM instructions per run call; 0 = none */
  const char *write_dir;            /* sandbox: the one directory the library's writers
                                       may create files in (NULL: none may) */
  double deadline;                  /* wall-clock seconds per run call; 0 = none */
} lvs_host_opts;
/* CONSTRUCTOR with fences (opts NULL = lvs_host_new(0)). A script that
 * passes the memory cap gets "not enough memory" (or the core's "out of
 * memory"); one that passes the budget gets "instruction budget of N
 * exhausted"; one that runs past the deadline "deadline of S s exceeded"
 * (in Lua, or in the core's long loops, or before a dense LAPACK call that
 * cannot end in time: see lvs_fence); in every case the run returns nonzero
 * and the host goes on. In a sandbox, modules and recipes are read only
 * from the host's own directories (lvs_host_add_path, LVS_PATH, the
 * library's); writers accept only paths inside write_dir; nothing starts a
 * program. Returns NULL when the host cannot be set up whole (memory cap
 * too small, a write_dir that is not a directory, a negative or NaN
 * deadline, an infinite one): never a half-built sandbox. */
LVS_API lvs_host *lvs_host_new_ex(const lvs_host_opts *opts);
/* Stop the run in progress (from any thread, or a signal handler): it ends
 * with "interrupted by the host" at the next check (Lua: every 1000
 * instructions; the core: its long loops). The next run starts afresh. */
LVS_API void lvs_host_interrupt(lvs_host *h);
LVS_API size_t lvs_host_memory(const lvs_host *h); /* bytes in use now */
/* BORROWED: the underlying lua_State* (as void* so this header needs no
 * Lua headers). */
LVS_API void *lvs_host_state(lvs_host *h);
/* Add a directory to search for lua/levelshift and recipes. */
LVS_API int lvs_host_add_path(lvs_host *h, const char *dir);

#ifdef __cplusplus
}
#endif
#endif
