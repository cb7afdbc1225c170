/* random.c -- Haar-distributed random orthogonal matrices, for checking
 * that results do not depend on the basis a model is written in.
 *
 * Q is the orthogonal factor of the QR decomposition of an n x n matrix of
 * independent standard normal entries, with each column multiplied by the
 * sign of the matching diagonal entry of R, which makes the decomposition
 * unique and Q exactly Haar-distributed (F. Mezzadri, "How to generate
 * random matrices from the classical compact groups", Notices of the AMS
 * 54, 592 (2007), section 5). QR by LAPACK's dgeqrf and dorgqr.
 *
 * Normal deviates: Marsaglia's polar method (G. Marsaglia and T. A. Bray,
 * SIAM Review 6, 260 (1964)) on uniforms from xoshiro256** seeded through
 * splitmix64 (D. Blackman and S. Vigna, "Scrambled linear pseudorandom
 * number generators", ACM TOMS 47, 36 (2021)). Same seed, same matrix, on
 * every machine with IEEE doubles and the same libm log/sqrt. */
#include <lapacke.h>
#include <math.h>
#include <stdint.h>
#include <string.h>
#include "internal.h"

typedef struct {
  uint64_t s[4];
} rng;

static uint64_t splitmix64(uint64_t *x) {
  uint64_t z = (*x += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

static uint64_t rotl(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }

static uint64_t next(rng *r) {
  uint64_t *s = r->s;
  uint64_t result = rotl(s[1] * 5, 7) * 9, t = s[1] << 17;
  s[2] ^= s[0];
  s[3] ^= s[1];
  s[1] ^= s[2];
  s[0] ^= s[3];
  s[2] ^= t;
  s[3] = rotl(s[3], 45);
  return result;
}

/* uniform on (-1, 1), 53 bits */
static double uniform_pm1(rng *r) { return (double)(next(r) >> 11) * 0x1.0p-52 - 1.0; }

/* fills x[0..n) with standard normal deviates */
static void normals(rng *r, double *x, size_t n) {
  size_t i = 0;
  while (i < n) {
    double u, v, s;
    do {
      u = uniform_pm1(r);
      v = uniform_pm1(r);
      s = u * u + v * v;
    } while (s >= 1.0 || s == 0.0);
    double f = sqrt(-2.0 * log(s) / s);
    x[i++] = u * f;
    if (i < n) x[i++] = v * f;
  }
}

int lvs_random_orthogonal(lvs_ctx *ctx, size_t n, uint64_t seed, lvs_matrix **out) {
  *out = NULL;
  if (n < 1) return lvsi_fail(ctx, LVS_EINVAL, "dimension must be at least 1");
  if (n > (size_t)INT32_MAX) return lvsi_fail(ctx, LVS_EINVAL, "dimension %zu too large", n);
  int st = lvsi_dense_ok(ctx, n, n, sizeof(double), "random orthogonal matrix");
  if (st) return st;
  /* QR and the explicit Q: 4n^3/3 flops each (Golub & Van Loan 2013, 5.2) */
  if ((st = lvsi_fence_cost(ctx, 8.0 / 3.0 * (double)n * (double)n * (double)n, "random_orthogonal"))) return st;
  lvs_matrix *q = NULL;
  if ((st = lvsi_mat_alloc(ctx, n, n, 0, 0, 0, &q))) return st;
  double *tau = lvsi_malloc(ctx, n * sizeof(double));
  double *sgn = lvsi_malloc(ctx, n * sizeof(double));
  if (!tau || !sgn) {
    st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory for a random orthogonal matrix");
    goto done;
  }
  rng r;
  uint64_t x = seed;
  for (int k = 0; k < 4; k++) r.s[k] = splitmix64(&x);
  normals(&r, q->a, n * n);
  lapack_int N = (lapack_int)n, info;
  info = LAPACKE_dgeqrf(LAPACK_COL_MAJOR, N, N, q->a, N, tau);
  if (info) {
    st = lvsi_fail(ctx, LVS_ELAPACK, "dgeqrf failed (info %d)", (int)info);
    goto done;
  }
  for (size_t j = 0; j < n; j++) sgn[j] = q->a[j + j * n] < 0 ? -1.0 : 1.0;
  info = LAPACKE_dorgqr(LAPACK_COL_MAJOR, N, N, N, q->a, N, tau);
  if (info) {
    st = lvsi_fail(ctx, LVS_ELAPACK, "dorgqr failed (info %d)", (int)info);
    goto done;
  }
  for (size_t j = 0; j < n; j++)
    if (sgn[j] < 0)
      for (size_t i = 0; i < n; i++) q->a[i + j * n] = -q->a[i + j * n];
done:
  lvsi_free(ctx, tau);
  lvsi_free(ctx, sgn);
  if (st) {
    lvs_matrix_free(q);
    return st;
  }
  *out = q;
  return LVS_OK;
}
