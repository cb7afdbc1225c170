/* lazyla.c -- LAPACKE and CBLAS loaded on first use.
 *
 * Loading and relocating Debian's LAPACKE/OpenBLAS stack (liblapacke,
 * liblapack, libblas, libopenblas, libgfortran, libquadmath, libtmglib)
 * costs about 8 ms at every start, and OpenBLAS starts its threads at
 * load time. Most scripts (recipes, checks, a series of a diagonal H0)
 * never call LAPACK, so the library is not linked against them: each
 * LAPACKE_ and cblas_ function the core uses is defined here with the
 * header's own prototype (the compiler checks it), and forwards to the
 * real one, found with dlopen/dlsym by the library's SONAME (recorded at
 * configure time, LVS_LAPACKE_SONAME and LVS_BLAS_SONAME; the environment
 * variables LVS_LAPACKE and LVS_CBLAS override them) on the first call.
 * Thread-safe: each library is opened once (pthread_once), each symbol is
 * looked up once and published with an atomic store.
 *
 * A library that was present at build time but cannot be opened at run
 * time is a broken installation: like the dynamic loader at start-up, we
 * print which library and why, and exit with status 127.
 *
 * To use another LAPACKE or CBLAS function in the core: add a FWD line
 * below with the prototype copied from lapacke.h or cblas.h (FWDV for a
 * void function); the compiler checks it against the header. These
 * definitions are hidden (CMAKE_C_VISIBILITY_PRESET), so they never
 * interpose on the loaded libraries' own calls. */
#include <arpack.h>
#include <cblas.h>
#include <dlfcn.h>
#include <lapacke.h>
#include <umfpack.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include "internal.h"

#ifndef LVS_LAPACKE_SONAME
#define LVS_LAPACKE_SONAME "liblapacke.so.3"
#endif
#ifndef LVS_BLAS_SONAME
#define LVS_BLAS_SONAME "libopenblas.so.0"
#endif

#ifndef LVS_ARPACK_SONAME
#define LVS_ARPACK_SONAME "libarpack.so.2"
#endif
#ifndef LVS_UMFPACK_SONAME
#define LVS_UMFPACK_SONAME "libumfpack.so.5"
#endif

enum { LIB_LAPACKE, LIB_BLAS, LIB_ARPACK, LIB_UMFPACK, NLIBS };
static const char* const sonames[NLIBS] = {LVS_LAPACKE_SONAME, LVS_BLAS_SONAME, LVS_ARPACK_SONAME,
                                           LVS_UMFPACK_SONAME};
static const char* const envnames[NLIBS] = {"LVS_LAPACKE", "LVS_CBLAS", "LVS_ARPACK", "LVS_UMFPACK"};
static void* handles[NLIBS];
static pthread_once_t once[NLIBS] = {PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT,
                                     PTHREAD_ONCE_INIT};

/* LVS_LAPACKE, LVS_CBLAS, LVS_ARPACK and LVS_UMFPACK in the environment
 * name other libraries (a path or a SONAME) with the same interface */
static const char* lib_name(int lib) {
  const char* env = getenv(envnames[lib]);
  return env && *env ? env : sonames[lib];
}

static void open_lib(int lib) {
  handles[lib] = dlopen(lib_name(lib), RTLD_NOW | RTLD_LOCAL);
  if (!handles[lib]) {
    fprintf(stderr, "levelshift: cannot load %s, needed for this computation: %s\n", lib_name(lib),
            dlerror());
    exit(127);
  }
}
static void open_lapacke(void) { open_lib(LIB_LAPACKE); }
static void open_blas(void) { open_lib(LIB_BLAS); }
static void open_arpack(void) { open_lib(LIB_ARPACK); }
static void open_umfpack(void) { open_lib(LIB_UMFPACK); }

/* the library handle, opened on first use */
static void* lib_handle(int lib) {
  static void (*const openers[NLIBS])(void) = {open_lapacke, open_blas, open_arpack, open_umfpack};
  pthread_once(&once[lib], openers[lib]);
  return handles[lib];
}

static void* la_sym(void** slot, int lib, const char* name) {
  void* f = __atomic_load_n(slot, __ATOMIC_ACQUIRE);
  if (f) return f;
  f = dlsym(lib_handle(lib), name);
  if (!f) {
    fprintf(stderr, "levelshift: %s has no %s: %s\n", lib_name(lib), name, dlerror());
    exit(127);
  }
  __atomic_store_n(slot, f, __ATOMIC_RELEASE);
  return f;
}

/* An optional BLAS symbol (OpenBLAS's extensions), looked up once; NULL
 * when the loaded BLAS lacks it. */
static void* const absent = (void*)&absent;
static void* opt_sym(void** slot, const char* name) {
  void* f = __atomic_load_n(slot, __ATOMIC_ACQUIRE);
  if (!f) {
    f = dlsym(lib_handle(LIB_BLAS), name);
    if (!f) f = absent;
    __atomic_store_n(slot, f, __ATOMIC_RELEASE);
  }
  return f == absent ? NULL : f;
}
static void *slot_get_threads, *slot_set_threads, *slot_pool_stop;

/* OpenBLAS's thread count, for callers about to run BLAS inside their own
 * threads or on tiny matrices (loads the BLAS); 0 when the BLAS has no
 * such control. */
int lvsi_blas_threads(void) {
  int (*get)(void) = (int (*)(void))opt_sym(&slot_get_threads, "openblas_get_num_threads");
  return get ? get() : 0;
}

void lvsi_set_blas_threads(int n) {
  if (n < 1) return;
  void (*set)(int) = (void (*)(int))opt_sym(&slot_set_threads, "openblas_set_num_threads");
  if (set) set(n);
}

/* Stops OpenBLAS's idle thread pool (it restarts on the next threaded
 * call); nothing with another BLAS. */
void lvsi_blas_pool_stop(void) {
  void (*stop)(void) = (void (*)(void))opt_sym(&slot_pool_stop, "blas_thread_shutdown_");
  if (stop) stop();
}

void lvs_linalg(const char** lapacke, const char** cblas, int* blas_threads) {
  (void)lib_handle(LIB_LAPACKE);
  (void)lib_handle(LIB_BLAS);
  if (lapacke) *lapacke = lib_name(LIB_LAPACKE);
  if (cblas) *cblas = lib_name(LIB_BLAS);
  if (blas_threads) *blas_threads = lvsi_blas_threads();
  /* OpenBLAS starts its pool at load time and the idle threads spin
   * (sched_yield) for a while: on two cores they took CPU from whatever the
   * script did next (3.8% of a 16-site chain job under perf). The next
   * threaded BLAS call restarts the pool. */
  lvsi_blas_pool_stop();
}

/* ---- the forwarding definitions (prototypes from lapacke.h and cblas.h) ---- */

/* FWD(ret, name, (prototype), (arguments), library): a definition of name
 * with the header's prototype that calls the loaded library's name */
#define FWD(ret, name, params, args, lib)                                  \
  static void *slot_##name;                                                \
  ret name params {                                                        \
    return ((ret(*) params)la_sym(&slot_##name, lib, #name)) args;   \
  }
#define FWDV(name, params, args, lib)                                      \
  static void *slot_##name;                                                \
  void name params { ((void(*) params)la_sym(&slot_##name, lib, #name)) args; }

/* clang-format off */
FWD(lapack_int, LAPACKE_dgbtrf_work, (int matrix_layout, lapack_int m, lapack_int n, lapack_int kl,
    lapack_int ku, double* ab, lapack_int ldab, lapack_int* ipiv), (matrix_layout, m, n, kl, ku, ab,
    ldab, ipiv), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dgbtrs_work, (int matrix_layout, char trans, lapack_int n, lapack_int kl,
    lapack_int ku, lapack_int nrhs, const double* ab, lapack_int ldab, const lapack_int* ipiv,
    double* b, lapack_int ldb), (matrix_layout, trans, n, kl, ku, nrhs, ab, ldab, ipiv, b, ldb),
    LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dgeqrf, (int matrix_layout, lapack_int m, lapack_int n, double* a,
    lapack_int lda, double* tau), (matrix_layout, m, n, a, lda, tau), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dgttrf, (lapack_int n, double* dl, double* d, double* du, double* du2,
    lapack_int* ipiv), (n, dl, d, du, du2, ipiv), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dgttrs_work, (int matrix_layout, char trans, lapack_int n, lapack_int nrhs,
    const double* dl, const double* d, const double* du, const double* du2, const lapack_int* ipiv,
    double* b, lapack_int ldb), (matrix_layout, trans, n, nrhs, dl, d, du, du2, ipiv, b, ldb),
    LIB_LAPACKE)
FWD(double, LAPACKE_dlamch, (char cmach), (cmach), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dorgqr, (int matrix_layout, lapack_int m, lapack_int n, lapack_int k,
    double* a, lapack_int lda, const double* tau), (matrix_layout, m, n, k, a, lda, tau),
    LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dormtr, (int matrix_layout, char side, char uplo, char trans, lapack_int m,
    lapack_int n, const double* a, lapack_int lda, const double* tau, double* c, lapack_int ldc),
    (matrix_layout, side, uplo, trans, m, n, a, lda, tau, c, ldc), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dpbtrf_work, (int matrix_layout, char uplo, lapack_int n, lapack_int kd,
    double* ab, lapack_int ldab), (matrix_layout, uplo, n, kd, ab, ldab), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dpbtrs_work, (int matrix_layout, char uplo, lapack_int n, lapack_int kd,
    lapack_int nrhs, const double* ab, lapack_int ldab, double* b, lapack_int ldb), (matrix_layout,
    uplo, n, kd, nrhs, ab, ldab, b, ldb), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsbevx, (int matrix_layout, char jobz, char range, char uplo, lapack_int n,
    lapack_int kd, double* ab, lapack_int ldab, double* q, lapack_int ldq, double vl, double vu,
    lapack_int il, lapack_int iu, double abstol, lapack_int* m, double* w, double* z, lapack_int
    ldz, lapack_int* ifail), (matrix_layout, jobz, range, uplo, n, kd, ab, ldab, q, ldq, vl, vu, il,
    iu, abstol, m, w, z, ldz, ifail), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsbtrd_work, (int matrix_layout, char vect, char uplo, lapack_int n,
    lapack_int kd, double* ab, lapack_int ldab, double* d, double* e, double* q, lapack_int ldq,
    double* work), (matrix_layout, vect, uplo, n, kd, ab, ldab, d, e, q, ldq, work), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dstebz, (char range, char order, lapack_int n, double vl, double vu,
    lapack_int il, lapack_int iu, double abstol, const double* d, const double* e, lapack_int* m,
    lapack_int* nsplit, double* w, lapack_int* iblock, lapack_int* isplit), (range, order, n, vl,
    vu, il, iu, abstol, d, e, m, nsplit, w, iblock, isplit), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dstebz_work, (char range, char order, lapack_int n, double vl, double vu,
    lapack_int il, lapack_int iu, double abstol, const double* d, const double* e, lapack_int* m,
    lapack_int* nsplit, double* w, lapack_int* iblock, lapack_int* isplit, double* work, lapack_int*
    iwork), (range, order, n, vl, vu, il, iu, abstol, d, e, m, nsplit, w, iblock, isplit, work,
    iwork), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dstein, (int matrix_layout, lapack_int n, const double* d, const double* e,
    lapack_int m, const double* w, const lapack_int* iblock, const lapack_int* isplit, double* z,
    lapack_int ldz, lapack_int* ifailv), (matrix_layout, n, d, e, m, w, iblock, isplit, z, ldz,
    ifailv), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsterf, (lapack_int n, double* d, double* e), (n, d, e), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dstevr, (int matrix_layout, char jobz, char range, lapack_int n, double* d,
    double* e, double vl, double vu, lapack_int il, lapack_int iu, double abstol, lapack_int* m,
    double* w, double* z, lapack_int ldz, lapack_int* isuppz), (matrix_layout, jobz, range, n, d, e,
    vl, vu, il, iu, abstol, m, w, z, ldz, isuppz), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsyev, (int matrix_layout, char jobz, char uplo, lapack_int n, double* a,
    lapack_int lda, double* w), (matrix_layout, jobz, uplo, n, a, lda, w), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsyevd, (int matrix_layout, char jobz, char uplo, lapack_int n, double* a,
    lapack_int lda, double* w), (matrix_layout, jobz, uplo, n, a, lda, w), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsyevr, (int matrix_layout, char jobz, char range, char uplo, lapack_int n,
    double* a, lapack_int lda, double vl, double vu, lapack_int il, lapack_int iu, double abstol,
    lapack_int* m, double* w, double* z, lapack_int ldz, lapack_int* isuppz), (matrix_layout, jobz,
    range, uplo, n, a, lda, vl, vu, il, iu, abstol, m, w, z, ldz, isuppz), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsygv, (int matrix_layout, lapack_int itype, char jobz, char uplo,
    lapack_int n, double* a, lapack_int lda, double* b, lapack_int ldb, double* w), (matrix_layout,
    itype, jobz, uplo, n, a, lda, b, ldb, w), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsytrd, (int matrix_layout, char uplo, lapack_int n, double* a, lapack_int
    lda, double* d, double* e, double* tau), (matrix_layout, uplo, n, a, lda, d, e, tau),
    LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsytrf, (int matrix_layout, char uplo, lapack_int n, double* a, lapack_int
    lda, lapack_int* ipiv), (matrix_layout, uplo, n, a, lda, ipiv), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsytrs, (int matrix_layout, char uplo, lapack_int n, lapack_int nrhs, const
    double* a, lapack_int lda, const lapack_int* ipiv, double* b, lapack_int ldb), (matrix_layout,
    uplo, n, nrhs, a, lda, ipiv, b, ldb), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsyevd_work, (int matrix_layout, char jobz, char uplo, lapack_int n, double* a,
    lapack_int lda, double* w, double* work, lapack_int lwork, lapack_int* iwork, lapack_int liwork),
    (matrix_layout, jobz, uplo, n, a, lda, w, work, lwork, iwork, liwork), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_dsyevr_work, (int matrix_layout, char jobz, char range, char uplo, lapack_int n,
    double* a, lapack_int lda, double vl, double vu, lapack_int il, lapack_int iu, double abstol,
    lapack_int* m, double* w, double* z, lapack_int ldz, lapack_int* isuppz, double* work, lapack_int
    lwork, lapack_int* iwork, lapack_int liwork), (matrix_layout, jobz, range, uplo, n, a, lda, vl, vu,
    il, iu, abstol, m, w, z, ldz, isuppz, work, lwork, iwork, liwork), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_zheevd_work, (int matrix_layout, char jobz, char uplo, lapack_int n,
    lapack_complex_double* a, lapack_int lda, double* w, lapack_complex_double* work, lapack_int lwork,
    double* rwork, lapack_int lrwork, lapack_int* iwork, lapack_int liwork), (matrix_layout, jobz, uplo,
    n, a, lda, w, work, lwork, rwork, lrwork, iwork, liwork), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_zheevr_work, (int matrix_layout, char jobz, char range, char uplo, lapack_int n,
    lapack_complex_double* a, lapack_int lda, double vl, double vu, lapack_int il, lapack_int iu, double
    abstol, lapack_int* m, double* w, lapack_complex_double* z, lapack_int ldz, lapack_int* isuppz,
    lapack_complex_double* work, lapack_int lwork, double* rwork, lapack_int lrwork, lapack_int* iwork,
    lapack_int liwork), (matrix_layout, jobz, range, uplo, n, a, lda, vl, vu, il, iu, abstol, m, w, z,
    ldz, isuppz, work, lwork, rwork, lrwork, iwork, liwork), LIB_LAPACKE)
FWD(lapack_int, LAPACKE_zheev, (int matrix_layout, char jobz, char uplo, lapack_int n,
    lapack_complex_double* a, lapack_int lda, double* w), (matrix_layout, jobz, uplo, n, a, lda, w),
    LIB_LAPACKE)
FWD(lapack_int, LAPACKE_zheevd, (int matrix_layout, char jobz, char uplo, lapack_int n,
    lapack_complex_double* a, lapack_int lda, double* w), (matrix_layout, jobz, uplo, n, a, lda, w),
    LIB_LAPACKE)
FWD(lapack_int, LAPACKE_zheevr, (int matrix_layout, char jobz, char range, char uplo, lapack_int n,
    lapack_complex_double* a, lapack_int lda, double vl, double vu, lapack_int il, lapack_int iu,
    double abstol, lapack_int* m, double* w, lapack_complex_double* z, lapack_int ldz, lapack_int*
    isuppz), (matrix_layout, jobz, range, uplo, n, a, lda, vl, vu, il, iu, abstol, m, w, z, ldz,
    isuppz), LIB_LAPACKE)
FWDV(cblas_dgemm, (OPENBLAS_CONST enum CBLAS_ORDER Order, OPENBLAS_CONST enum CBLAS_TRANSPOSE
    TransA, OPENBLAS_CONST enum CBLAS_TRANSPOSE TransB, OPENBLAS_CONST blasint M, OPENBLAS_CONST
    blasint N, OPENBLAS_CONST blasint K, OPENBLAS_CONST double alpha, OPENBLAS_CONST double *A,
    OPENBLAS_CONST blasint lda, OPENBLAS_CONST double *B, OPENBLAS_CONST blasint ldb, OPENBLAS_CONST
    double beta, double *C, OPENBLAS_CONST blasint ldc), (Order, TransA, TransB, M, N, K, alpha, A,
    lda, B, ldb, beta, C, ldc), LIB_BLAS)
FWDV(cblas_dgemv, (OPENBLAS_CONST enum CBLAS_ORDER order, OPENBLAS_CONST enum CBLAS_TRANSPOSE trans,
    OPENBLAS_CONST blasint m, OPENBLAS_CONST blasint n, OPENBLAS_CONST double alpha, OPENBLAS_CONST
    double *a, OPENBLAS_CONST blasint lda, OPENBLAS_CONST double *x, OPENBLAS_CONST blasint incx,
    OPENBLAS_CONST double beta, double *y, OPENBLAS_CONST blasint incy), (order, trans, m, n, alpha,
    a, lda, x, incx, beta, y, incy), LIB_BLAS)
FWDV(cblas_zgemm, (OPENBLAS_CONST enum CBLAS_ORDER Order, OPENBLAS_CONST enum CBLAS_TRANSPOSE
    TransA, OPENBLAS_CONST enum CBLAS_TRANSPOSE TransB, OPENBLAS_CONST blasint M, OPENBLAS_CONST
    blasint N, OPENBLAS_CONST blasint K, OPENBLAS_CONST void *alpha, OPENBLAS_CONST void *A,
    OPENBLAS_CONST blasint lda, OPENBLAS_CONST void *B, OPENBLAS_CONST blasint ldb, OPENBLAS_CONST
    void *beta, void *C, OPENBLAS_CONST blasint ldc), (Order, TransA, TransB, M, N, K, alpha, A,
    lda, B, ldb, beta, C, ldc), LIB_BLAS)
FWDV(cblas_zgemv, (OPENBLAS_CONST enum CBLAS_ORDER order, OPENBLAS_CONST enum CBLAS_TRANSPOSE trans,
    OPENBLAS_CONST blasint m, OPENBLAS_CONST blasint n, OPENBLAS_CONST void *alpha, OPENBLAS_CONST
    void *a, OPENBLAS_CONST blasint lda, OPENBLAS_CONST void *x, OPENBLAS_CONST blasint incx,
    OPENBLAS_CONST void *beta, void *y, OPENBLAS_CONST blasint incy), (order, trans, m, n, alpha, a,
    lda, x, incx, beta, y, incy), LIB_BLAS)
/* ARPACK's ISO C interface (arpack.h) */
FWDV(dsaupd_c, (a_int* ido, char const* bmat, a_int n, char const* which, a_int nev, double tol,
    double* resid, a_int ncv, double* v, a_int ldv, a_int* iparam, a_int* ipntr, double* workd,
    double* workl, a_int lworkl, a_int* info), (ido, bmat, n, which, nev, tol, resid, ncv, v, ldv,
    iparam, ipntr, workd, workl, lworkl, info), LIB_ARPACK)
FWDV(dseupd_c, (a_int rvec, char const* howmny, a_int const* select, double* d, double* z, a_int
    ldz, double sigma, char const* bmat, a_int n, char const* which, a_int nev, double tol, double*
    resid, a_int ncv, double* v, a_int ldv, a_int* iparam, a_int* ipntr, double* workd, double*
    workl, a_int lworkl, a_int* info), (rvec, howmny, select, d, z, ldz, sigma, bmat, n, which,
    nev, tol, resid, ncv, v, ldv, iparam, ipntr, workd, workl, lworkl, info), LIB_ARPACK)
FWDV(znaupd_c, (a_int* ido, char const* bmat, a_int n, char const* which, a_int nev, double tol,
    double _Complex* resid, a_int ncv, double _Complex* v, a_int ldv, a_int* iparam, a_int* ipntr,
    double _Complex* workd, double _Complex* workl, a_int lworkl, double* rwork, a_int* info), (ido,
    bmat, n, which, nev, tol, resid, ncv, v, ldv, iparam, ipntr, workd, workl, lworkl, rwork,
    info), LIB_ARPACK)
FWDV(zneupd_c, (a_int rvec, char const* howmny, a_int const* select, double _Complex* d, double
    _Complex* z, a_int ldz, double _Complex sigma, double _Complex* workev, char const* bmat, a_int
    n, char const* which, a_int nev, double tol, double _Complex* resid, a_int ncv, double _Complex*
    v, a_int ldv, a_int* iparam, a_int* ipntr, double _Complex* workd, double _Complex* workl,
    a_int lworkl, double* rwork, a_int* info), (rvec, howmny, select, d, z, ldz, sigma, workev,
    bmat, n, which, nev, tol, resid, ncv, v, ldv, iparam, ipntr, workd, workl, lworkl, rwork,
    info), LIB_ARPACK)
/* UMFPACK, SuiteSparse_long indices (umfpack.h); complex values packed
 * (Az = NULL: interleaved re, im) */
FWDV(umfpack_dl_defaults, (double Control[UMFPACK_CONTROL]), (Control), LIB_UMFPACK)
FWD(SuiteSparse_long, umfpack_dl_symbolic, (SuiteSparse_long n_row, SuiteSparse_long n_col, const
    SuiteSparse_long Ap[], const SuiteSparse_long Ai[], const double Ax[], void** Symbolic, const
    double Control[UMFPACK_CONTROL], double Info[UMFPACK_INFO]), (n_row, n_col, Ap, Ai, Ax,
    Symbolic, Control, Info), LIB_UMFPACK)
FWD(SuiteSparse_long, umfpack_dl_numeric, (const SuiteSparse_long Ap[], const SuiteSparse_long
    Ai[], const double Ax[], void* Symbolic, void** Numeric, const double Control[UMFPACK_CONTROL],
    double Info[UMFPACK_INFO]), (Ap, Ai, Ax, Symbolic, Numeric, Control, Info), LIB_UMFPACK)
FWD(SuiteSparse_long, umfpack_dl_solve, (SuiteSparse_long sys, const SuiteSparse_long Ap[], const
    SuiteSparse_long Ai[], const double Ax[], double X[], const double B[], void* Numeric, const
    double Control[UMFPACK_CONTROL], double Info[UMFPACK_INFO]), (sys, Ap, Ai, Ax, X, B, Numeric,
    Control, Info), LIB_UMFPACK)
FWDV(umfpack_dl_free_symbolic, (void** Symbolic), (Symbolic), LIB_UMFPACK)
FWDV(umfpack_dl_free_numeric, (void** Numeric), (Numeric), LIB_UMFPACK)
FWDV(umfpack_zl_defaults, (double Control[UMFPACK_CONTROL]), (Control), LIB_UMFPACK)
FWD(SuiteSparse_long, umfpack_zl_symbolic, (SuiteSparse_long n_row, SuiteSparse_long n_col, const
    SuiteSparse_long Ap[], const SuiteSparse_long Ai[], const double Ax[], const double Az[], void**
    Symbolic, const double Control[UMFPACK_CONTROL], double Info[UMFPACK_INFO]), (n_row, n_col, Ap,
    Ai, Ax, Az, Symbolic, Control, Info), LIB_UMFPACK)
FWD(SuiteSparse_long, umfpack_zl_numeric, (const SuiteSparse_long Ap[], const SuiteSparse_long
    Ai[], const double Ax[], const double Az[], void* Symbolic, void** Numeric, const double
    Control[UMFPACK_CONTROL], double Info[UMFPACK_INFO]), (Ap, Ai, Ax, Az, Symbolic, Numeric,
    Control, Info), LIB_UMFPACK)
FWD(SuiteSparse_long, umfpack_zl_solve, (SuiteSparse_long sys, const SuiteSparse_long Ap[], const
    SuiteSparse_long Ai[], const double Ax[], const double Az[], double Xx[], double Xz[], const
    double Bx[], const double Bz[], void* Numeric, const double Control[UMFPACK_CONTROL], double
    Info[UMFPACK_INFO]), (sys, Ap, Ai, Ax, Az, Xx, Xz, Bx, Bz, Numeric, Control, Info),
    LIB_UMFPACK)
FWDV(umfpack_zl_free_symbolic, (void** Symbolic), (Symbolic), LIB_UMFPACK)
FWDV(umfpack_zl_free_numeric, (void** Numeric), (Numeric), LIB_UMFPACK)
/* clang-format on */
