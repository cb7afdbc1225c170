/* sparse_lu.c -- sparse LU factorization and solves through SuiteSparse's
 * UMFPACK (T. A. Davis, "Algorithm 832: UMFPACK V4.3 -- an unsymmetric-
 * pattern multifrontal method", ACM TOMS 30, 196 (2004)).
 *
 * Used for shift-invert Krylov spectra ((H - sigma) x = b, krylov.c) and for
 * the bordered systems of the series of a sparse H0 ([[E - H0, P], [P^H, 0]],
 * METHODS.md section 1(b); series.c). UMFPACK pivots for stability, so the
 * indefinite bordered matrix needs no special care; a matrix that is
 * singular to working precision is reported (UMFPACK_WARNING_singular_matrix)
 * rather than solved.
 *
 * Storage: our CSC arrays (size_t column pointers and row indices, rows
 * ascending in each column) are passed as SuiteSparse_long (long on LP64
 * Linux: same size and representation for the values we use); complex
 * values stay interleaved (UMFPACK's "packed" form, Az = NULL).
 * UMFPACK allocates its factors with its own malloc, outside the context's
 * allocator (so outside a host's memory cap); the factor size is bounded
 * below by checking the fill UMFPACK reports after the symbolic phase
 * against the dense cap. */
#include <math.h>
#include <string.h>
#include <umfpack.h>
#include "internal.h"

_Static_assert(sizeof(SuiteSparse_long) == sizeof(size_t), "SuiteSparse_long must be 64-bit");

struct lvsi_splu {
  lvs_ctx *ctx;
  size_t n;
  int cplx;
  SuiteSparse_long *cp, *ri; /* owned copies (UMFPACK's solve needs the matrix again) */
  double *a;
  void *numeric;
  double control[UMFPACK_CONTROL];
};

void lvsi_splu_free(lvsi_splu *f) {
  if (!f) return;
  if (f->numeric) {
    if (f->cplx) umfpack_zl_free_numeric(&f->numeric);
    else umfpack_dl_free_numeric(&f->numeric);
  }
  lvs_ctx *ctx = f->ctx;
  lvsi_free(ctx, f->cp);
  lvsi_free(ctx, f->ri);
  lvsi_free(ctx, f->a);
  lvsi_free(ctx, f);
}

static int umf_error(lvs_ctx *ctx, const char *what, const char *phase, SuiteSparse_long status) {
  if (status == UMFPACK_ERROR_out_of_memory)
    return lvsi_fail(ctx, LVS_ENOMEM, "%s: out of memory in the sparse LU factorization (%s)", what, phase);
  return lvsi_fail(ctx, LVS_ELAPACK, "%s: sparse LU factorization failed in its %s phase (UMFPACK status %ld)",
                   what, phase, (long)status);
}

/* Factor the n x n CSC matrix (cp, ri, a; complex interleaved when cplx).
 * The arrays are copied. `what` names the caller in messages. A singular
 * matrix is LVS_EINVAL with "singular" in the message. */
int lvsi_splu_new(lvs_ctx *ctx, size_t n, int cplx, const size_t *cp, const size_t *ri, const double *a,
                  const char *what, lvsi_splu **out) {
  return lvsi_splu_new_capped(ctx, n, cplx, cp, ri, a, 0.0, what, out);
}

/* The same with a budget: when UMFPACK's estimate of the factors' bytes
 * exceeds max_bytes (> 0), nothing is factored and the return is
 * LVSI_SPLU_TOO_FULL (with a message), so the caller can take another way. */
int lvsi_splu_new_capped(lvs_ctx *ctx, size_t n, int cplx, const size_t *cp, const size_t *ri, const double *a,
                         double max_bytes, const char *what, lvsi_splu **out) {
  *out = NULL;
  lvsi_splu *f = lvsi_calloc(ctx, 1, sizeof *f);
  if (!f) return lvsi_fail(ctx, LVS_ENOMEM, "%s: out of memory", what);
  f->ctx = ctx;
  f->n = n;
  f->cplx = cplx ? 1 : 0;
  size_t nnz = cp[n], vals = nnz * (cplx ? 2 : 1);
  f->cp = lvsi_malloc(ctx, (n + 1) * sizeof(SuiteSparse_long));
  f->ri = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof(SuiteSparse_long));
  f->a = lvsi_malloc(ctx, (vals ? vals : 1) * sizeof(double));
  if (!f->cp || !f->ri || !f->a) {
    lvsi_splu_free(f);
    return lvsi_fail(ctx, LVS_ENOMEM, "%s: out of memory", what);
  }
  memcpy(f->cp, cp, (n + 1) * sizeof(size_t));
  memcpy(f->ri, ri, nnz * sizeof(size_t));
  memcpy(f->a, a, vals * sizeof(double));
  double info[UMFPACK_INFO];
  void *symbolic = NULL;
  SuiteSparse_long st;
  if (cplx) {
    umfpack_zl_defaults(f->control);
    st = umfpack_zl_symbolic((SuiteSparse_long)n, (SuiteSparse_long)n, f->cp, f->ri, f->a, NULL, &symbolic,
                             f->control, info);
  } else {
    umfpack_dl_defaults(f->control);
    st = umfpack_dl_symbolic((SuiteSparse_long)n, (SuiteSparse_long)n, f->cp, f->ri, f->a, &symbolic,
                             f->control, info);
  }
  if (st != UMFPACK_OK) {
    lvsi_splu_free(f);
    return umf_error(ctx, what, "symbolic", st);
  }
  /* the factors' estimated size (in Units = 8 bytes) against the dense cap */
  double bytes = info[UMFPACK_NUMERIC_SIZE_ESTIMATE] * info[UMFPACK_SIZE_OF_UNIT];
  if (max_bytes > 0 && bytes > max_bytes) {
    if (cplx) umfpack_zl_free_symbolic(&symbolic);
    else umfpack_dl_free_symbolic(&symbolic);
    lvsi_splu_free(f);
    lvsi_fail(ctx, LVS_ECAP, "%s: the sparse LU factors would need about %.3g MB (budget %.3g MB)", what, bytes / 1e6,
              max_bytes / 1e6);
    return LVSI_SPLU_TOO_FULL;
  }
  if (bytes > (double)ctx->dense_cap) {
    if (cplx) umfpack_zl_free_symbolic(&symbolic);
    else umfpack_dl_free_symbolic(&symbolic);
    lvsi_splu_free(f);
    return lvsi_fail(ctx, LVS_ECAP,
                     "%s: the sparse LU factors of a %zu-state matrix need about %.3g GB, above the dense cap of"
                     " %.3g GB",
                     what, n, bytes / 1e9, ctx->dense_cap / 1e9);
  }
  if (cplx) {
    st = umfpack_zl_numeric(f->cp, f->ri, f->a, NULL, symbolic, &f->numeric, f->control, info);
    umfpack_zl_free_symbolic(&symbolic);
  } else {
    st = umfpack_dl_numeric(f->cp, f->ri, f->a, symbolic, &f->numeric, f->control, info);
    umfpack_dl_free_symbolic(&symbolic);
  }
  if (st == UMFPACK_WARNING_singular_matrix) {
    lvsi_splu_free(f);
    return lvsi_fail(ctx, LVS_EINVAL, "%s: the matrix is singular (a zero pivot in its sparse LU factorization)",
                     what);
  }
  if (st != UMFPACK_OK) {
    lvsi_splu_free(f);
    return umf_error(ctx, what, "numeric", st);
  }
  /* reciprocal condition estimate from the pivots: far below eps is as good
   * as singular */
  double rcond = info[UMFPACK_RCOND];
  if (!(rcond > 1e-15 * 1e-3)) {
    lvsi_splu_free(f);
    return lvsi_fail(ctx, LVS_EINVAL,
                     "%s: the matrix is singular to working precision (pivot ratio %.3g in its sparse LU factorization)",
                     what, rcond);
  }
  *out = f;
  return LVS_OK;
}

/* x = A^{-1} b (x and b of n values, 2n when complex; may not alias).
 * One step of iterative refinement is UMFPACK's default. */
int lvsi_splu_solve(const lvsi_splu *f, const double *b, double *x) {
  double info[UMFPACK_INFO];
  SuiteSparse_long st;
  if (f->cplx)
    st = umfpack_zl_solve(UMFPACK_A, f->cp, f->ri, f->a, NULL, x, NULL, b, NULL, f->numeric, f->control, info);
  else
    st = umfpack_dl_solve(UMFPACK_A, f->cp, f->ri, f->a, x, b, f->numeric, f->control, info);
  if (st == UMFPACK_WARNING_singular_matrix)
    return lvsi_fail(f->ctx, LVS_EINVAL, "sparse solve: the matrix is singular");
  if (st != UMFPACK_OK) return umf_error(f->ctx, "sparse solve", "solve", st);
  return LVS_OK;
}

size_t lvsi_splu_dim(const lvsi_splu *f) { return f->n; }
