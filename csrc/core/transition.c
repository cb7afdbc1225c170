/* transition.c -- transitions under a time-dependent perturbation (hbar = 1).
 *
 * H(t) = H0 + W(t), with W(t) = pulse(t) * V or a field callback W(t). All
 * amplitudes live in the eigenbasis of H0 (ascending energies), interaction
 * picture: c_f(t) = e^{i E_f t} psi_f(t), c(t0) = e_from.
 *
 * First order: a_f = -i int W_fi(t) e^{i w_fi t} dt by Filon's rule on double
 * panels (Filon, Proc. R. Soc. Edinb. 49, 38 (1929); Abramowitz & Stegun
 * 25.4.47), error from n vs n/2 panels. The phase e^{i w c} of successive
 * panels comes from a complex recurrence, re-seeded with cexp every 256 steps.
 * A built-in pulse is split into carriers c_k e^{i nu_k t} s_k(t) first, so
 * Filon's weights carry w_fi + nu_k and the grid of each envelope s_k (on its
 * own support) follows the envelope only. Default grids (steps = 0): from
 * the envelope widths, or 4096 samples of a Lua function, doubled until the
 * change from halving is below LVS_TRANSITION_RTOL relative (see rel_err).
 * Second order: c1_m(t) by cumulative linear Filon on each interval (exact
 * in the oscillation, second order in W), then the outer integral the same
 * way (Dyson, Phys. Rev. 75, 486 (1949)); error again from halving.
 * Exact, pulse(t) * V: the classical 4th-order Runge-Kutta method on the
 * interaction-picture equation i dc/dt = p(t) D(t) V D(t)^* c, D = e^{iEt}
 * (Kutta, Z. Math. Phys. 46, 435 (1901)); V is kept as a list of its nonzero
 * entries, D by a recurrence on the half-step grid. With a tolerance the step
 * count grows until the Richardson estimate |c_m - c_m'|/((m/m')^4 - 1) is
 * below it (Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)).
 * Exact, V(t) from a callback (or on request): 4th-order Magnus (Blanes,
 * Casas, Oteo, Ros, Phys. Rep. 470, 151 (2009)) with two Gauss nodes per
 * step, exp(-iK) by zheev per step.
 */
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"
#if defined(__SSE2__)
#include <xmmintrin.h>
/* Flush-to-zero and denormals-are-zero for the duration of a propagation:
 * amplitudes far out in a truncated basis decay below 1e-308, and denormal
 * arithmetic is up to 100x slower on x86; the change is below 1e-307. */
#define FTZ_ON(saved) ((saved) = _mm_getcsr(), _mm_setcsr((saved) | 0x8040u))
#define FTZ_OFF(saved) _mm_setcsr(saved)
#else
#define FTZ_ON(saved) ((void)((saved) = 0))
#define FTZ_OFF(saved) ((void)(saved))
#endif

enum { P_GAUSS, P_SQUARE, P_SINE, P_RAMP, P_SUM };

/* default grid refinement: the first-order error estimate (change from
 * halving) relative to the amplitude, see rel_err */
#define LVS_TRANSITION_RTOL 1e-7

struct lvs_pulse {
  lvs_ctx *ctx;
  int kind;
  double a, b, c, d;
  lvs_pulse *x, *y; /* envelope (sine) or the two terms (sum); owned */
};

static int pulse_alloc(lvs_ctx *ctx, int kind, lvs_pulse **out) {
  *out = NULL;
  lvs_pulse *p = lvsi_calloc(ctx, 1, sizeof *p);
  if (!p) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (pulse)");
  p->ctx = ctx;
  p->kind = kind;
  *out = p;
  return LVS_OK;
}

static int finite4(lvs_ctx *ctx, const char *what, double a, double b, double c, double d) {
  if (!isfinite(a) || !isfinite(b) || !isfinite(c) || !isfinite(d))
    return lvsi_fail(ctx, LVS_EINVAL, "%s: parameters must be finite numbers", what);
  return LVS_OK;
}

int lvs_pulse_gaussian(lvs_ctx *ctx, double amplitude, double center, double width, lvs_pulse **out) {
  *out = NULL;
  int st = finite4(ctx, "pulse.gaussian", amplitude, center, width, 0);
  if (st) return st;
  if (!(width > 0)) return lvsi_fail(ctx, LVS_EINVAL, "pulse.gaussian: width must be > 0, got %g", width);
  if ((st = pulse_alloc(ctx, P_GAUSS, out))) return st;
  (*out)->a = amplitude, (*out)->b = center, (*out)->c = width;
  return LVS_OK;
}

int lvs_pulse_square(lvs_ctx *ctx, double amplitude, double start, double stop, lvs_pulse **out) {
  *out = NULL;
  int st = finite4(ctx, "pulse.square", amplitude, start, stop, 0);
  if (st) return st;
  if (!(stop > start)) return lvsi_fail(ctx, LVS_EINVAL, "pulse.square: stop (%g) must exceed start (%g)", stop, start);
  if ((st = pulse_alloc(ctx, P_SQUARE, out))) return st;
  (*out)->a = amplitude, (*out)->b = start, (*out)->c = stop;
  return LVS_OK;
}

int lvs_pulse_ramp(lvs_ctx *ctx, double from, double to, double start, double stop, lvs_pulse **out) {
  *out = NULL;
  int st = finite4(ctx, "pulse.ramp", from, to, start, stop);
  if (st) return st;
  if (!(stop > start)) return lvsi_fail(ctx, LVS_EINVAL, "pulse.ramp: stop (%g) must exceed start (%g)", stop, start);
  if ((st = pulse_alloc(ctx, P_RAMP, out))) return st;
  (*out)->a = from, (*out)->b = to, (*out)->c = start, (*out)->d = stop;
  return LVS_OK;
}

int lvs_pulse_copy(const lvs_pulse *p, lvs_pulse **out) {
  *out = NULL;
  int st = pulse_alloc(p->ctx, p->kind, out);
  if (st) return st;
  lvs_pulse *q = *out;
  q->a = p->a, q->b = p->b, q->c = p->c, q->d = p->d;
  if ((p->x && (st = lvs_pulse_copy(p->x, &q->x))) || (p->y && (st = lvs_pulse_copy(p->y, &q->y)))) {
    lvs_pulse_free(q);
    *out = NULL;
    return st;
  }
  return LVS_OK;
}

int lvs_pulse_sine(lvs_ctx *ctx, double amplitude, double omega, double phase, const lvs_pulse *envelope,
                   lvs_pulse **out) {
  *out = NULL;
  int st = finite4(ctx, "pulse.sine", amplitude, omega, phase, 0);
  if (st) return st;
  if ((st = pulse_alloc(ctx, P_SINE, out))) return st;
  (*out)->a = amplitude, (*out)->b = omega, (*out)->c = phase;
  if (envelope && (st = lvs_pulse_copy(envelope, &(*out)->x))) {
    lvs_pulse_free(*out);
    *out = NULL;
  }
  return st;
}

int lvs_pulse_sum(const lvs_pulse *a, const lvs_pulse *b, lvs_pulse **out) {
  *out = NULL;
  int st = pulse_alloc(a->ctx, P_SUM, out);
  if (st) return st;
  if ((st = lvs_pulse_copy(a, &(*out)->x)) || (st = lvs_pulse_copy(b, &(*out)->y))) {
    lvs_pulse_free(*out);
    *out = NULL;
  }
  return st;
}

void lvs_pulse_free(lvs_pulse *p) {
  if (!p) return;
  lvs_pulse_free(p->x);
  lvs_pulse_free(p->y);
  lvsi_free(p->ctx, p);
}

double lvs_pulse_eval(const lvs_pulse *p, double t) {
  switch (p->kind) {
    case P_GAUSS: {
      double u = (t - p->b) / p->c;
      return p->a * exp(-0.5 * u * u);
    }
    case P_SQUARE: return (t >= p->b && t <= p->c) ? p->a : 0.0;
    case P_SINE: return p->a * sin(p->b * t + p->c) * (p->x ? lvs_pulse_eval(p->x, t) : 1.0);
    case P_RAMP:
      if (t <= p->c) return p->a;
      if (t >= p->d) return p->b;
      return p->a + (p->b - p->a) * (t - p->c) / (p->d - p->c);
    case P_SUM: return lvs_pulse_eval(p->x, t) + lvs_pulse_eval(p->y, t);
  }
  return NAN;
}

void lvs_pulse_support(const lvs_pulse *p, double *lo, double *hi) {
  double l1, h1, l2, h2;
  switch (p->kind) {
    case P_GAUSS: *lo = p->b - 12 * p->c, *hi = p->b + 12 * p->c; return;
    case P_SQUARE: *lo = p->b, *hi = p->c; return;
    case P_SINE:
      if (p->x) lvs_pulse_support(p->x, lo, hi);
      else *lo = -INFINITY, *hi = INFINITY;
      return;
    case P_RAMP:
      if (p->a == 0 && p->b == 0) *lo = p->c, *hi = p->d;
      else *lo = p->a == 0 ? p->c : -INFINITY, *hi = p->b == 0 ? p->d : INFINITY;
      return;
    case P_SUM:
      lvs_pulse_support(p->x, &l1, &h1);
      lvs_pulse_support(p->y, &l2, &h2);
      *lo = fmin(l1, l2), *hi = fmax(h1, h2);
      return;
  }
  *lo = -INFINITY, *hi = INFINITY;
}

/* ---- transitions ---------------------------------------------------------- */

struct lvs_transition {
  lvs_ctx *ctx;
  size_t n, from, steps; /* steps: intervals of the fine grid (multiple of 4) */
  int order, exact;
  double t0, t1;
  double *E;            /* energies, ascending */
  double complex *U;    /* n x n eigenvectors of H0 (columns), col-major; NULL when
                           H0 is diagonal (then perm maps level -> input index) */
  double complex *V;    /* V in the eigenbasis (NULL for a field) */
  size_t nnz, *vi, *vp; /* nonzeros of V by column: rows vi[vp[j]..vp[j+1]) */
  double complex *vv;   /* their values */
  lvs_pulse *pulse;     /* copy, or NULL */
  double complex *a[3]; /* amplitudes by order (a[0] = delta) or exact in a[0] */
  double *err;          /* error estimate per final level */
  size_t *perm;         /* sorting permutation of a diagonal H0, or NULL */
  double numax;         /* fastest carrier of a built-in pulse (0: none or unknown) */
  char warn[1024];
};

static void tr_free(lvs_transition *tr);
void lvs_transition_free(lvs_transition *tr) { tr_free(tr); }
static void tr_free(lvs_transition *tr) {
  if (!tr) return;
  lvs_ctx *ctx = tr->ctx;
  lvsi_free(ctx, tr->E);
  lvsi_free(ctx, tr->U);
  lvsi_free(ctx, tr->V);
  lvs_pulse_free(tr->pulse);
  for (int k = 0; k < 3; k++) lvsi_free(ctx, tr->a[k]);
  lvsi_free(ctx, tr->err);
  lvsi_free(ctx, tr->perm);
  lvsi_free(ctx, tr->vi);
  lvsi_free(ctx, tr->vp);
  lvsi_free(ctx, tr->vv);
  lvsi_free(ctx, tr);
}

static void add_warning(lvs_transition *tr, const char *msg) {
  size_t len = strlen(tr->warn);
  if (strstr(tr->warn, msg)) return;
  snprintf(tr->warn + len, sizeof tr->warn - len, "%s%s", len ? "; " : "", msg);
}

/* The perturbation in the eigenbasis at time t: W (n x n, col-major). */
typedef struct {
  lvs_transition *tr;
  const lvs_transition_source *src;
  double complex *tmp, *tmp2; /* n x n scratch for the field transform */
} source_eval;

static int eval_scalar(source_eval *s, double t, double *p) {
  lvs_transition *tr = s->tr;
  if (tr->pulse) *p = lvs_pulse_eval(tr->pulse, t);
  else if (s->src->pulse_fn) {
    int st = s->src->pulse_fn(s->src->ud, t, p);
    if (st) return lvsi_fail(tr->ctx, LVS_EINVAL, "transition: the pulse function failed at t = %.17g", t);
  } else *p = 1.0;
  if (!isfinite(*p)) return lvsi_fail(tr->ctx, LVS_EINVAL, "transition: the pulse is NaN or infinite at t = %.17g", t);
  return LVS_OK;
}

/* W(t) = U^H Vfield(t) U into out (n x n). Only for fields. */
static int eval_field(source_eval *s, double t, double complex *out) {
  lvs_transition *tr = s->tr;
  size_t n = tr->n;
  int st = s->src->field_fn(s->src->ud, t, (double *)s->tmp);
  if (st) return lvsi_fail(tr->ctx, LVS_EINVAL, "transition: the perturbation function failed at t = %.17g", t);
  for (size_t k = 0; k < n * n; k++)
    if (!isfinite(creal(s->tmp[k])) || !isfinite(cimag(s->tmp[k])))
      return lvsi_fail(tr->ctx, LVS_EINVAL, "transition: the perturbation has a NaN or infinite entry at t = %.17g", t);
  if (!tr->U) { /* diagonal H0: a permutation */
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) out[i + j * n] = s->tmp[tr->perm[i] + tr->perm[j] * n];
    return LVS_OK;
  }
  /* tmp2 = Vf U ; out = U^H tmp2 */
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      double complex acc = 0;
      for (size_t k = 0; k < n; k++) acc += s->tmp[i + k * n] * tr->U[k + j * n];
      s->tmp2[i + j * n] = acc;
    }
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      double complex acc = 0;
      for (size_t k = 0; k < n; k++) acc += conj(tr->U[k + i * n]) * s->tmp2[k + j * n];
      out[i + j * n] = acc;
    }
  return LVS_OK;
}

/* Filon weights for a double panel of half-width h at frequency w. */
static void filon_weights(double w, double h, double complex *M0, double complex *M1, double complex *M2) {
  double th = w * h;
  if (fabs(th) < 0.1) {
    double t2 = th * th;
    *M0 = 2 * h * (1 - t2 / 6 + t2 * t2 / 120);
    *M1 = 2 * I * h * h * (th / 3 - th * t2 / 30 + th * t2 * t2 / 840);
    *M2 = 2 * h * h * h * (1.0 / 3 - t2 / 10 + t2 * t2 / 168);
  } else {
    double s = sin(th), c = cos(th);
    *M0 = 2 * s / w;
    *M1 = 2 * I * (s - th * c) / (w * w);
    *M2 = 2 * ((th * th - 2) * s + 2 * th * c) / (w * w * w);
  }
}

/* int_{t0}^{t0 + m h} f(t) e^{i w t} dt, f sampled at t0 + k h, k = 0..m
 * (stride between samples: stride; m even). */
static double complex filon(const double complex *f, size_t stride, size_t m, double t0, double h, double w) {
  double complex M0, M1, M2;
  filon_weights(w, h, &M0, &M1, &M2);
  double complex step = cexp(I * w * 2 * h), ph = 0, acc = 0;
  for (size_t j = 0; j + 2 <= m; j += 2) {
    if ((j / 2) % 256 == 0) ph = cexp(I * w * (t0 + (double)(j + 1) * h));
    double complex fm = f[j * stride], fc = f[(j + 1) * stride], fp = f[(j + 2) * stride];
    double complex A = fc, B = (fp - fm) / (2 * h), C = (fp - 2 * fc + fm) / (2 * h * h);
    acc += ph * (A * M0 + B * M1 + C * M2);
    ph *= step;
  }
  return acc;
}

/* All first-order Filon integrals of one real sample set at once:
 * I1[f] = int p(t) e^{i w_f t} dt on the fine grid (N intervals of h, N a
 * multiple of 4) and I2[f] on every second sample, for the error estimate.
 * Time runs in the outer loop so the inner loop over levels streams through
 * plain arrays (vectorizable); per double panel it needs only the three real
 * Filon coefficients A, B, C and the phase at the panel centre, advanced by
 * a recurrence and re-seeded with sin/cos every 128 panel pairs. The coarse
 * panel (half-width 2h) centred at fine sample 2j+2 has phase ph_j e^{iwh}. */
static inline __attribute__((always_inline)) void filon_all_body(const double *restrict p, size_t N, double t0, double h, const double *restrict w,
                             size_t n, double *restrict ws) {
  double *phr = ws, *phi = ws + n, *s1r = ws + 2 * n, *s1i = ws + 3 * n, *s2r = ws + 4 * n, *s2i = ws + 5 * n;
  double *S = ws + 6 * n; /* 12 sums: fine A,B,C and coarse A,B,C, re and im */
  double *Ar = S, *Ai = S + n, *Br = S + 2 * n, *Bi = S + 3 * n, *Cr = S + 4 * n, *Ci = S + 5 * n;
  double *Qr = S + 6 * n, *Qi = S + 7 * n, *Rr = S + 8 * n, *Ri = S + 9 * n, *Tr = S + 10 * n, *Ti = S + 11 * n;
  for (size_t k = 0; k < 12 * n; k++) S[k] = 0;
  for (size_t f = 0; f < n; f++) s1r[f] = cos(2 * w[f] * h), s1i[f] = sin(2 * w[f] * h);
  for (size_t f = 0; f < n; f++) s2r[f] = s1r[f] * s1r[f] - s1i[f] * s1i[f], s2i[f] = 2 * s1r[f] * s1i[f];
  const double i2h = 1 / (2 * h), i2h2 = 1 / (2 * h * h), i4h = 1 / (4 * h), i8h2 = 1 / (8 * h * h);
  for (size_t j = 0; j + 4 <= N; j += 4) { /* fine panels j/2, j/2 + 1; coarse panel j/4 */
    if (j % 512 == 0)
      for (size_t f = 0; f < n; f++) {
        double a = w[f] * (t0 + (double)(j + 1) * h);
        phr[f] = cos(a), phi[f] = sin(a);
      }
    double f0 = p[j], f1 = p[j + 1], f2 = p[j + 2], f3 = p[j + 3], f4 = p[j + 4];
    double A = f1, B = (f2 - f0) * i2h, C = (f2 - 2 * f1 + f0) * i2h2;
    double A2 = f3, B2 = (f4 - f2) * i2h, C2 = (f4 - 2 * f3 + f2) * i2h2;
    double Aq = f2, Bq = (f4 - f0) * i4h, Cq = (f4 - 2 * f2 + f0) * i8h2;
#pragma GCC ivdep /* the 18 arrays are disjoint slices of ws */
    for (size_t f = 0; f < n; f++) {
      double pr = phr[f], pi = phi[f];
      double qr = pr * s1r[f] - pi * s1i[f], qi = pr * s1i[f] + pi * s1r[f];
      Ar[f] += pr * A + qr * A2, Ai[f] += pi * A + qi * A2;
      Br[f] += pr * B + qr * B2, Bi[f] += pi * B + qi * B2;
      Cr[f] += pr * C + qr * C2, Ci[f] += pi * C + qi * C2;
      Qr[f] += pr * Aq, Qi[f] += pi * Aq;
      Rr[f] += pr * Bq, Ri[f] += pi * Bq;
      Tr[f] += pr * Cq, Ti[f] += pi * Cq;
      phr[f] = pr * s2r[f] - pi * s2i[f], phi[f] = pr * s2i[f] + pi * s2r[f];
    }
  }
}

static void filon_all_plain(const double *restrict p, size_t N, double t0, double h, const double *restrict w, size_t n,
                            double *restrict ws) {
  filon_all_body(p, N, t0, h, w, n, ws);
}
#if defined(__GNUC__) && (defined(__x86_64__) || defined(__i386__))
#define LVS_HAVE_AVX2_PATH 1
__attribute__((target("avx2,fma"))) static void filon_all_avx2(const double *restrict p, size_t N, double t0, double h,
                                                                const double *restrict w, size_t n, double *restrict ws) {
  filon_all_body(p, N, t0, h, w, n, ws);
}
#endif
/* the AVX2/FMA build of the same loop where the CPU has it */
static void filon_all_kernel(const double *p, size_t N, double t0, double h, const double *w, size_t n, double *ws) {
#ifdef LVS_HAVE_AVX2_PATH
  __builtin_cpu_init(); /* idempotent; needed before __builtin_cpu_supports in a shared library */
  if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma")) {
    filon_all_avx2(p, N, t0, h, w, n, ws);
    return;
  }
#endif
  filon_all_plain(p, N, t0, h, w, n, ws);
}

static void filon_all(const double *p, size_t N, double t0, double h, const double *w, size_t n, double *ws,
                      double complex *I1, double complex *I2) {
  filon_all_kernel(p, N, t0, h, w, n, ws);
  const double *S = ws + 6 * n;
  for (size_t f = 0; f < n; f++) {
    double complex M0, M1, M2, sA = S[f] + I * S[n + f], sB = S[2 * n + f] + I * S[3 * n + f],
                               sC = S[4 * n + f] + I * S[5 * n + f];
    filon_weights(w[f], h, &M0, &M1, &M2);
    I1[f] = M0 * sA + M1 * sB + M2 * sC;
    sA = S[6 * n + f] + I * S[7 * n + f], sB = S[8 * n + f] + I * S[9 * n + f], sC = S[10 * n + f] + I * S[11 * n + f];
    filon_weights(w[f], 2 * h, &M0, &M1, &M2);
    I2[f] = cexp(I * w[f] * h) * (M0 * sA + M1 * sB + M2 * sC);
  }
}

/* Linear-Filon weights on one interval [0, h]: J0 = int e^{iws}, J1 = int s e^{iws} / h. */
static void lin_weights(double w, double h, double complex *J0, double complex *J1) {
  double th = w * h;
  if (fabs(th) < 1e-3) {
    *J0 = h * (1 + I * th / 2 - th * th / 6);
    *J1 = h * (0.5 + I * th / 3 - th * th / 8);
  } else {
    double complex e = cexp(I * th);
    *J0 = (e - 1) / (I * w);
    *J1 = (e / (I * w) - (e - 1) / (I * w * I * w * h));
  }
}

/* Second-order amplitudes with m intervals of width h (samples every stride
 * on the fine grid). W(k) via callback-free access: Wk(k) returns the matrix
 * at fine sample k and its scale. */
typedef struct {
  double complex *Ws; /* field samples, (steps+1) x n x n, or NULL */
  double *p;          /* pulse samples (steps+1) */
  double complex *V;
  size_t n;
  size_t N;           /* intervals sampled (0: none yet) */
} samples;

static inline const double complex *Wk(const samples *S, size_t k, double *scale) {
  if (S->Ws) {
    *scale = 1.0;
    return S->Ws + k * S->n * S->n;
  }
  *scale = S->p[k];
  return S->V;
}

static int second_order(lvs_transition *tr, const samples *S, size_t stride, double complex *a2) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n, i = tr->from, m = tr->steps / stride;
  double h = (tr->t1 - tr->t0) / (double)tr->steps * (double)stride;
  double complex *buf = lvsi_calloc(ctx, 8 * n, sizeof(double complex));
  if (!buf) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (second order)");
  double complex *c1 = buf, *ph = buf + n, *st = buf + 2 * n, *J0 = buf + 3 * n, *J1 = buf + 4 * n,
                 *y = buf + 5 * n, *Gold = buf + 6 * n, *Gnew = buf + 7 * n;
  for (size_t f = 0; f < n; f++) {
    double w = tr->E[f] - tr->E[i];
    lin_weights(w, h, &J0[f], &J1[f]);
    st[f] = cexp(I * w * h);
    a2[f] = 0;
  }
  for (size_t k = 0; k <= m; k++) {
    double t = tr->t0 + (double)k * h;
    if (k % 256 == 0)
      for (size_t f = 0; f < n; f++) ph[f] = cexp(I * (tr->E[f] - tr->E[i]) * t);
    /* G_f(k) = sum_m W_fm(t) e^{-i w_mi t} c1_m(t) */
    double sc;
    const double complex *W = Wk(S, k * stride, &sc);
    for (size_t q = 0; q < n; q++) y[q] = conj(ph[q]) * c1[q];
    for (size_t f = 0; f < n; f++) Gnew[f] = 0;
    if (sc != 0.0)
      for (size_t q = 0; q < n; q++) {
        if (y[q] == 0) continue;
        double complex yq = sc * y[q];
        const double complex *col = W + q * n;
        for (size_t f = 0; f < n; f++) Gnew[f] += col[f] * yq;
      }
    if (k > 0) /* outer integral over [t - h, t] */
      for (size_t f = 0; f < n; f++) {
        double complex phl = ph[f] / st[f];
        a2[f] += -I * phl * (Gold[f] * (J0[f] - J1[f]) + Gnew[f] * J1[f]);
      }
    if (k < m) { /* advance c1 over [t, t + h] */
      double s2;
      const double complex *W2 = Wk(S, (k + 1) * stride, &s2);
      for (size_t q = 0; q < n; q++) {
        double complex wa = sc * W[q + i * n], wb = s2 * W2[q + i * n];
        if (wa == 0 && wb == 0) continue;
        c1[q] += -I * ph[q] * (wa * (J0[q] - J1[q]) + wb * J1[q]);
      }
    }
    memcpy(Gold, Gnew, n * sizeof *Gnew);
    for (size_t f = 0; f < n; f++) ph[f] *= st[f];
  }
  lvsi_free(ctx, buf);
  return LVS_OK;
}

/* The nonzero pattern of V in the levels of a diagonal H0 (a permutation of
 * the input), read straight from the op's storage: no dense n x n copy. */
static int v_pattern_permuted(lvs_transition *tr, const lvs_matrix *v) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n, nnz = 0;
  size_t *iperm = lvsi_malloc(ctx, n * sizeof(size_t));
  size_t *inv = NULL; /* stored row -> input index (visible ops) */
  if (!iperm) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
  for (size_t k = 0; k < n; k++) iperm[tr->perm[k]] = k;
  if (v->sparse) {
    if (v->vis) {
      inv = lvsi_malloc(ctx, v->rows * sizeof(size_t));
      if (!inv) { lvsi_free(ctx, iperm); return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)"); }
      for (size_t r = 0; r < v->rows; r++) inv[r] = SIZE_MAX;
      for (size_t k = 0; k < n; k++) inv[v->vis[k]] = k;
    }
    for (size_t j = 0; j < n; j++) {
      size_t col = v->vis ? v->vis[tr->perm[j]] : tr->perm[j];
      for (size_t k = v->cp[col]; k < v->cp[col + 1]; k++) {
        size_t in = inv ? inv[v->ri[k]] : v->ri[k];
        nnz += in != SIZE_MAX && (v->a[v->cplx ? 2 * k : k] != 0 || (v->cplx && v->a[2 * k + 1] != 0));
      }
    }
  } else {
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        double re, im;
        lvs_matrix_get(v, i, j, &re, &im);
        nnz += re != 0 || im != 0;
      }
  }
  tr->vp = lvsi_malloc(ctx, (n + 1) * sizeof(size_t));
  tr->vi = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof(size_t));
  tr->vv = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof(double complex));
  if (!tr->vp || !tr->vi || !tr->vv) {
    lvsi_free(ctx, iperm), lvsi_free(ctx, inv);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
  }
  nnz = 0;
  for (size_t j = 0; j < n; j++) {
    tr->vp[j] = nnz;
    if (v->sparse) {
      size_t col = v->vis ? v->vis[tr->perm[j]] : tr->perm[j];
      for (size_t k = v->cp[col]; k < v->cp[col + 1]; k++) {
        size_t in = inv ? inv[v->ri[k]] : v->ri[k];
        double re = v->a[v->cplx ? 2 * k : k], im = v->cplx ? v->a[2 * k + 1] : 0;
        if (in == SIZE_MAX || (re == 0 && im == 0)) continue;
        tr->vi[nnz] = iperm[in], tr->vv[nnz++] = re + I * im;
      }
    } else {
      for (size_t i = 0; i < n; i++) {
        double re, im;
        lvs_matrix_get(v, tr->perm[i], tr->perm[j], &re, &im);
        if (re != 0 || im != 0) tr->vi[nnz] = i, tr->vv[nnz++] = re + I * im;
      }
    }
  }
  tr->vp[n] = tr->nnz = nnz;
  lvsi_free(ctx, iperm), lvsi_free(ctx, inv);
  return LVS_OK;
}

/* V in the eigenbasis of a non-diagonal H0 (dense), then its pattern;
 * entries below 1e-15 of the largest are rounding left by the rotation. */
static int v_pattern_rotated(lvs_transition *tr, const lvs_matrix *v) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n;
  tr->V = lvsi_malloc(ctx, n * n * sizeof(double complex));
  double complex *tmp = lvsi_calloc(ctx, n * n, sizeof(double complex));
  double complex *t2 = lvsi_calloc(ctx, n * n, sizeof(double complex));
  if (!tr->V || !tmp || !t2) {
    lvsi_free(ctx, tmp), lvsi_free(ctx, t2);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
  }
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      double re, im;
      lvs_matrix_get(v, i, j, &re, &im);
      tmp[i + j * n] = re + I * im;
    }
  for (size_t j = 0; j < n; j++)
    for (size_t k = 0; k < n; k++) {
      double complex u = tr->U[k + j * n];
      if (u == 0) continue;
      for (size_t i = 0; i < n; i++) t2[i + j * n] += tmp[i + k * n] * u;
    }
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      double complex acc = 0;
      for (size_t k = 0; k < n; k++) acc += conj(tr->U[k + i * n]) * t2[k + j * n];
      tr->V[i + j * n] = acc;
    }
  lvsi_free(ctx, tmp), lvsi_free(ctx, t2);
  double vmax = 0;
  for (size_t k = 0; k < n * n; k++) vmax = fmax(vmax, cabs(tr->V[k]));
  double cut = 1e-15 * vmax;
  size_t nnz = 0;
  for (size_t k = 0; k < n * n; k++) nnz += cabs(tr->V[k]) > cut;
  tr->vp = lvsi_malloc(ctx, (n + 1) * sizeof(size_t));
  tr->vi = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof(size_t));
  tr->vv = lvsi_malloc(ctx, (nnz ? nnz : 1) * sizeof(double complex));
  if (!tr->vp || !tr->vi || !tr->vv) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
  nnz = 0;
  for (size_t j = 0; j < n; j++) {
    tr->vp[j] = nnz;
    for (size_t i = 0; i < n; i++)
      if (cabs(tr->V[i + j * n]) > cut) tr->vi[nnz] = i, tr->vv[nnz++] = tr->V[i + j * n];
  }
  tr->vp[n] = tr->nnz = nnz;
  return LVS_OK;
}

/* The dense V in the eigenbasis, built from the pattern when first needed
 * (second order and the Magnus propagator use it). */
static int dense_v(lvs_transition *tr) {
  if (tr->V) return LVS_OK;
  size_t n = tr->n;
  int st = lvsi_dense_ok(tr->ctx, n, n, sizeof(double complex), "transition (dense V)");
  if (st) return st;
  tr->V = lvsi_calloc(tr->ctx, n * n, sizeof(double complex));
  if (!tr->V) return lvsi_fail(tr->ctx, LVS_ENOMEM, "out of memory (transition)");
  for (size_t j = 0; j < n; j++)
    for (size_t k = tr->vp[j]; k < tr->vp[j + 1]; k++) tr->V[tr->vi[k] + j * n] = tr->vv[k];
  return LVS_OK;
}

static int setup(lvs_ctx *ctx, const lvs_transition_spec *sp, lvs_transition **out) {
  *out = NULL;
  if (!sp->h0) return lvsi_fail(ctx, LVS_EINVAL, "transition: H0 is missing");
  int nsrc = (sp->pulse != NULL) + (sp->src.pulse_fn != NULL) + (sp->src.field_fn != NULL);
  if (sp->src.field_fn ? nsrc != 1 : (nsrc != 1 || !sp->v))
    return lvsi_fail(ctx, LVS_EINVAL, "transition: give V with one pulse, or a perturbation function");
  int st = lvsi_check_hermitian(sp->h0, LVS_DEFAULT_HERM_TOL, "transition: H0");
  if (st) return st;
  size_t n = lvs_matrix_rows(sp->h0);
  if (sp->v) {
    if (lvs_matrix_rows(sp->v) != n || lvs_matrix_cols(sp->v) != n)
      return lvsi_fail(ctx, LVS_EDIM, "transition: V is %zux%zu but H0 is %zux%zu", lvs_matrix_rows(sp->v),
                       lvs_matrix_cols(sp->v), n, n);
    if ((st = lvsi_check_hermitian(sp->v, LVS_DEFAULT_HERM_TOL, "transition: V"))) return st;
  }
  if (sp->from >= n) return lvsi_fail(ctx, LVS_ERANGE, "transition: from = %zu is out of range 1..%zu", sp->from + 1, n);
  if (sp->order < 1 || sp->order > 2) return lvsi_fail(ctx, LVS_ERANGE, "transition: order must be 1 or 2, got %d", sp->order);
  double t0 = sp->t0, t1 = sp->t1;
  if (isnan(t0) || isnan(t1)) return lvsi_fail(ctx, LVS_EINVAL, "transition: t0 and t1 must be numbers");
  if (!(t1 > t0)) return lvsi_fail(ctx, LVS_EINVAL, "transition: t1 (%g) must exceed t0 (%g)", t1, t0);
  if (isinf(t0) || isinf(t1)) {
    double lo = -INFINITY, hi = INFINITY;
    if (sp->pulse) lvs_pulse_support(sp->pulse, &lo, &hi);
    if ((isinf(t0) && isinf(lo)) || (isinf(t1) && isinf(hi)))
      return lvsi_fail(ctx, LVS_EINVAL,
                       "transition: an infinite t0 or t1 needs a pulse that ends (gaussian, square, or an envelope)");
    if (isinf(t0)) t0 = lo;
    if (isinf(t1)) t1 = hi;
    if (!(t1 > t0)) return lvsi_fail(ctx, LVS_EINVAL, "transition: the pulse lies outside [t0, t1]");
  }
  size_t steps = sp->steps; /* 0: chosen from the problem by lvs_transition_new */
  if (steps && steps < 8) steps = 8;
  steps = (steps + 3) / 4 * 4;
  if ((st = lvsi_dense_ok(ctx, n, n, sizeof(double complex), "transition (eigenvectors)"))) return st;
  lvs_transition *tr = lvsi_calloc(ctx, 1, sizeof *tr);
  if (!tr) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
  tr->ctx = ctx, tr->n = n, tr->from = sp->from, tr->steps = steps, tr->order = sp->order;
  tr->t0 = t0, tr->t1 = t1;
  tr->E = lvsi_calloc(ctx, n, sizeof(double));
  tr->err = lvsi_calloc(ctx, n, sizeof(double));
  for (int k = 0; k < 3; k++) tr->a[k] = lvsi_calloc(ctx, n, sizeof(double complex));
  if (!tr->E || !tr->err || !tr->a[0] || !tr->a[1] || !tr->a[2]) {
    tr_free(tr);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
  }
  /* eigenbasis of H0: a diagonal H0 is only sorted (stable), else zheevd */
  int diag = 1;
  for (size_t j = 0; j < n && diag; j++)
    for (size_t i = 0; i < n; i++) {
      double re, im;
      lvs_matrix_get(sp->h0, i, j, &re, &im);
      if (i == j) tr->E[i] = re;
      else if (re != 0 || im != 0) { diag = 0; break; }
    }
  if (diag) {
    size_t *perm = lvsi_calloc(ctx, n, sizeof(size_t));
    double *E2 = lvsi_calloc(ctx, n, sizeof(double));
    if (!perm || !E2) {
      lvsi_free(ctx, perm), lvsi_free(ctx, E2);
      tr_free(tr);
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
    }
    for (size_t i = 0; i < n; i++) perm[i] = i;
    for (size_t i = 1; i < n; i++) { /* insertion sort, stable */
      size_t v = perm[i], j = i;
      while (j > 0 && tr->E[perm[j - 1]] > tr->E[v]) perm[j] = perm[j - 1], j--;
      perm[j] = v;
    }
    for (size_t i = 0; i < n; i++) E2[i] = tr->E[perm[i]];
    lvsi_free(ctx, tr->E);
    tr->E = E2;
    tr->perm = perm;
  } else {
    lvs_matrix *Z = NULL;
    tr->U = lvsi_malloc(ctx, n * n * sizeof(double complex));
    if (!tr->U) { tr_free(tr); return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)"); }
    if ((st = lvs_eigen(sp->h0, 0, 1, tr->E, &Z))) { tr_free(tr); return st; }
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        double re, im;
        lvs_matrix_get(Z, i, j, &re, &im);
        tr->U[i + j * n] = re + I * im;
      }
    lvs_matrix_free(Z);
  }
  if (sp->v) {
    if (diag) st = v_pattern_permuted(tr, sp->v);
    else st = v_pattern_rotated(tr, sp->v);
    if (st) { tr_free(tr); return st; }
  }
  if (sp->pulse && (st = lvs_pulse_copy(sp->pulse, &tr->pulse))) { tr_free(tr); return st; }
  *out = tr;
  return LVS_OK;
}

/* ---- first order for built-in pulses, carrier by carrier -------------------
 * A built-in pulse is a sum of terms c_k e^{i nu_k t} s_k(t) with s_k a plain
 * gaussian, square, ramp or 1: a sine carrier splits by
 * a sin(wt + phi) = (a/2i)(e^{i(wt+phi)} - e^{-i(wt+phi)}) (Euler's formula),
 * sums term by term. Then int p(t) e^{i w_f t} dt = sum_k c_k int s_k(t)
 * e^{i (w_f + nu_k) t} dt, and Filon's rule puts the whole oscillation into
 * its weights: the grid only has to follow the smooth s_k, whatever the
 * carrier frequency (Filon 1929; Iserles, BIT 44, 755 (2004), on Filon's
 * rule staying accurate as the frequency grows). */
typedef struct {
  double complex c;
  double nu;
  const lvs_pulse *env; /* gaussian, square or ramp; NULL = 1 */
} carrier_term;

#define MAX_TERMS 256

static size_t term_count(const lvs_pulse *p) {
  size_t a, b;
  switch (p->kind) {
    case P_SINE:
      a = p->x ? term_count(p->x) : 1;
      return a > MAX_TERMS ? MAX_TERMS + 1 : 2 * a;
    case P_SUM:
      a = term_count(p->x), b = term_count(p->y);
      return a + b > MAX_TERMS ? MAX_TERMS + 1 : a + b;
    default: return 1;
  }
}

static size_t decompose(const lvs_pulse *p, double complex c, double nu, carrier_term *out) {
  size_t k;
  switch (p->kind) {
    case P_SINE: {
      double complex cp = c * p->a * cexp(I * p->c) / (2 * I), cm = -c * p->a * cexp(-I * p->c) / (2 * I);
      if (!p->x) {
        out[0].c = cp, out[0].nu = nu + p->b, out[0].env = NULL;
        out[1].c = cm, out[1].nu = nu - p->b, out[1].env = NULL;
        return 2;
      }
      k = decompose(p->x, cp, nu + p->b, out);
      return k + decompose(p->x, cm, nu - p->b, out + k);
    }
    case P_SUM:
      k = decompose(p->x, c, nu, out);
      return k + decompose(p->y, c, nu, out + k);
    default: out[0].c = c, out[0].nu = nu, out[0].env = p; return 1;
  }
}

/* The pieces of [T0, T1] on which a plain envelope may be nonzero and is
 * smooth (up to 3; a ramp has kinks at start and stop). *scale: its time
 * scale (a gaussian's width), 0 for a polynomial of degree <= 1, which
 * Filon's rule integrates exactly on any grid. */
static size_t env_pieces(const lvs_pulse *e, double T0, double T1, double lo[3], double hi[3], double *scale) {
  double a[3], b[3];
  size_t m = 0, k = 0;
  *scale = 0;
  if (!e) a[m] = T0, b[m++] = T1;
  else if (e->kind == P_GAUSS) a[m] = e->b - 12 * e->c, b[m++] = e->b + 12 * e->c, *scale = e->c;
  else if (e->kind == P_SQUARE) a[m] = e->b, b[m++] = e->c;
  else if (e->kind == P_RAMP) {
    if (e->a != 0) a[m] = T0, b[m++] = e->c;
    if (e->a != 0 || e->b != 0) a[m] = e->c, b[m++] = e->d;
    if (e->b != 0) a[m] = e->d, b[m++] = T1;
  }
  for (size_t q = 0; q < m; q++) {
    double l = fmax(a[q], T0), h = fmin(b[q], T1);
    if (h > l) lo[k] = l, hi[k++] = h;
  }
  return k;
}

/* intervals on a piece of length len: a multiple of 4, at least 4 */
static size_t piece_intervals(double len, double h) {
  double want = ceil(len / h);
  if (!(want < 1e9)) want = 1e9;
  size_t N = (size_t)want;
  if (N < 4) N = 4;
  return (N + 3) / 4 * 4;
}

/* Per-level first-order integrals A[f] = int p e^{i w_f t} dt and the
 * change D[f] from halving every grid. h > 0: one spacing for every piece
 * (an explicit step count); h = 0: a gaussian piece gets q intervals per
 * width, a polynomial piece 4 * q / 8. */
static int fo_terms(lvs_transition *tr, const carrier_term *T, size_t nt, double h, double q, const double *w,
                    double complex *A, double complex *D, size_t *hmin_steps) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n;
  double *ws = lvsi_malloc(ctx, 19 * n * sizeof(double));
  double complex *I12 = lvsi_malloc(ctx, 2 * n * sizeof(double complex));
  double *p = NULL;
  size_t cap = 0;
  int st = LVS_OK;
  if (!ws || !I12) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (first order)"); goto done; }
  double *wk = ws + 18 * n;
  for (size_t f = 0; f < n; f++) A[f] = D[f] = 0;
  *hmin_steps = 0;
  for (size_t k = 0; k < nt; k++) {
    double lo[3], hi[3], scale;
    size_t np = env_pieces(T[k].env, tr->t0, tr->t1, lo, hi, &scale);
    for (size_t f = 0; f < n; f++) wk[f] = w[f] + T[k].nu;
    for (size_t c = 0; c < np; c++) {
      double len = hi[c] - lo[c];
      size_t N = h > 0 ? piece_intervals(len, h) : scale > 0 ? piece_intervals(len, scale / q) : piece_intervals(len, 8 * len / q);
      if (N + 1 > cap) {
        lvsi_free(ctx, p);
        cap = N + 1;
        if (!(p = lvsi_malloc(ctx, cap * sizeof(double)))) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (pulse samples)"); goto done; }
      }
      double hk = len / (double)N;
      if (!(hk > 1e-100)) { /* Filon's weights take h^3 */
        st = lvsi_fail(ctx, LVS_EINVAL, "transition: a pulse time scale of %g is too short to integrate (below 1e-100)", len);
        goto done;
      }
      for (size_t j = 0; j <= N; j++) p[j] = T[k].env ? lvs_pulse_eval(T[k].env, lo[c] + (double)j * hk) : 1.0;
      if (scale > 0) { /* the global grid that resolves this envelope as well */
        double g = ceil((tr->t1 - tr->t0) / hk);
        size_t gs = g < 4e9 ? (size_t)g : (size_t)4e9;
        if (gs > *hmin_steps) *hmin_steps = gs;
      }
      filon_all(p, N, lo[c], hk, wk, n, ws, I12, I12 + n);
      for (size_t f = 0; f < n; f++) {
        A[f] += T[k].c * I12[f];
        D[f] += T[k].c * (I12[f] - I12[n + f]);
      }
    }
  }
done:
  lvsi_free(ctx, ws), lvsi_free(ctx, I12), lvsi_free(ctx, p);
  return st;
}

/* The largest error estimate relative to its own amplitude; amplitudes below
 * 1e-2 of the largest count at that floor, so that levels whose probability
 * is 1e-4 of the largest or less do not drive the grid. *lvl: the level. */
static double rel_err(const lvs_transition *tr, const double complex *a, const double *err, size_t *lvl) {
  double amax = 0, r = 0;
  *lvl = 0;
  for (size_t f = 0; f < tr->n; f++) amax = fmax(amax, cabs(a[f]));
  if (amax == 0) return 0;
  for (size_t f = 0; f < tr->n; f++) {
    double q = err[f] / fmax(cabs(a[f]), 1e-2 * amax);
    if (q > r) r = q, *lvl = f;
  }
  return r;
}

/* The largest coupled Bohr frequency |E_f - E_j| with V_fj != 0 (0 for a field) */
static double bohr_max(const lvs_transition *tr) {
  double wmax = 0;
  for (size_t j = 0; tr->vp && j < tr->n; j++)
    for (size_t e = tr->vp[j]; e < tr->vp[j + 1]; e++) wmax = fmax(wmax, fabs(tr->E[tr->vi[e]] - tr->E[j]));
  return wmax;
}

/* a grid of `rad` radians per step of the fastest frequency, as a step count
 * (multiple of 4, from 64 to cap) */
static size_t grid_for(double window, double freq, double rad, size_t floor, size_t cap) {
  double want = window * freq / rad;
  size_t N = !(want < (double)cap) ? cap : (size_t)want;
  if (N < floor) N = floor;
  if (N < 64) N = 64;
  if (N > cap) N = cap;
  return (N + 3) / 4 * 4;
}

/* Samples of the pulse or field on the global grid of N intervals; when S
 * holds the grid of N/2, its samples are kept at the even points. */
static int sample_global(lvs_transition *tr, source_eval *se, size_t N, samples *S) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n, nn = S->Ws || se->src->field_fn ? n * n : 1;
  double h = (tr->t1 - tr->t0) / (double)N;
  int keep = S->N && 2 * S->N == N;
  int st;
  if (!(h > 1e-100)) /* Filon's weights take h^3 */
    return lvsi_fail(ctx, LVS_EINVAL, "transition: the time step %g is too short to integrate (below 1e-100)", h);
  if (se->src->field_fn) {
    if ((st = lvsi_dense_ok(ctx, (N + 1) * n, n, sizeof(double complex), "transition (field samples)"))) return st;
    double complex *W = lvsi_malloc(ctx, (N + 1) * nn * sizeof(double complex));
    if (!W) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (field samples)");
    for (size_t k = 0; k <= N; k++) {
      if (keep && k % 2 == 0) memcpy(W + k * nn, S->Ws + k / 2 * nn, nn * sizeof *W);
      else if ((st = eval_field(se, tr->t0 + (double)k * h, W + k * nn))) { lvsi_free(ctx, W); return st; }
    }
    lvsi_free(ctx, S->Ws);
    S->Ws = W;
  } else {
    double *p = lvsi_malloc(ctx, (N + 1) * sizeof(double));
    if (!p) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (pulse samples)");
    for (size_t k = 0; k <= N; k++) {
      if (keep && k % 2 == 0) p[k] = S->p[k / 2];
      else if ((st = eval_scalar(se, k == N ? tr->t1 : tr->t0 + (double)k * h, &p[k]))) { lvsi_free(ctx, p); return st; }
    }
    lvsi_free(ctx, S->p);
    S->p = p;
  }
  S->N = N;
  return LVS_OK;
}

/* first order from the global samples (N intervals) into a[1], err */
static int fo_sampled(lvs_transition *tr, const samples *S, const double complex *vcol) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n, N = S->N, i = tr->from;
  double h = (tr->t1 - tr->t0) / (double)N;
  if (!S->Ws) {
    double *ws = lvsi_malloc(ctx, 19 * n * sizeof(double));
    double complex *I12 = lvsi_malloc(ctx, 2 * n * sizeof(double complex));
    if (!ws || !I12) {
      lvsi_free(ctx, ws), lvsi_free(ctx, I12);
      return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (first order)");
    }
    double *w = ws + 18 * n;
    for (size_t f = 0; f < n; f++) w[f] = tr->E[f] - tr->E[i];
    filon_all(S->p, N, tr->t0, h, w, n, ws, I12, I12 + n);
    for (size_t f = 0; f < n; f++) {
      tr->a[1][f] = -I * vcol[f] * I12[f];
      tr->err[f] = cabs(vcol[f] * (I12[f] - I12[n + f]));
    }
    lvsi_free(ctx, ws), lvsi_free(ctx, I12);
    return LVS_OK;
  }
  double complex *F = lvsi_malloc(ctx, (N + 1) * sizeof(double complex));
  if (!F) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory");
  for (size_t f = 0; f < n; f++) {
    double w = tr->E[f] - tr->E[i];
    for (size_t k = 0; k <= N; k++) F[k] = S->Ws[k * n * n + f + i * n];
    double complex I1 = filon(F, 1, N, tr->t0, h, w), I2 = filon(F, 2, N / 2, tr->t0, 2 * h, w);
    tr->a[1][f] = -I * I1;
    tr->err[f] = cabs(I1 - I2);
  }
  lvsi_free(ctx, F);
  return LVS_OK;
}

static void warn_grid(lvs_transition *tr, const char *what, double rel, size_t lvl, size_t steps, int dflt) {
  char msg[300];
  if (dflt)
    snprintf(msg, sizeof msg,
             "%s not converged: error estimate %.2g relative at level %zu after refining to %zu steps", what, rel,
             lvl + 1, steps);
  else
    snprintf(msg, sizeof msg,
             "%s error estimate %.2g relative at level %zu with steps = %zu: give more steps or leave steps to the default",
             what, rel, lvl + 1, steps);
  add_warning(tr, msg);
}

int lvs_transition_new(lvs_ctx *ctx, const lvs_transition_spec *sp, lvs_transition **out) {
  lvs_transition *tr;
  int st = setup(ctx, sp, &tr);
  if (st) return st;
  size_t n = tr->n, i = tr->from, explicit_steps = tr->steps;
  samples S = {0};
  S.n = n;
  source_eval se = {tr, &sp->src, NULL, NULL};
  carrier_term *T = NULL;
  double complex *vcol = NULL, *A = NULL, *D = NULL;
  size_t nt = tr->pulse ? term_count(tr->pulse) : 0;
  double window = tr->t1 - tr->t0, wmax = bohr_max(tr), rel = 0;
  size_t lvl = 0;
  if (sp->src.field_fn) {
    se.tmp = lvsi_malloc(ctx, 2 * n * n * sizeof(double complex));
    if (!se.tmp) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (field samples)"); goto fail; }
    se.tmp2 = se.tmp + n * n;
  }
  vcol = lvsi_calloc(ctx, 3 * n, sizeof(double complex));
  if (!vcol) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (first order)"); goto fail; }
  A = vcol + n, D = vcol + 2 * n;
  for (size_t k = 0; tr->vp && k < tr->vp[i + 1] - tr->vp[i]; k++) vcol[tr->vi[tr->vp[i] + k]] = tr->vv[tr->vp[i] + k];
  tr->a[0][i] = 1;
  if (nt >= 1 && nt <= MAX_TERMS) {
    /* built-in pulse: carrier by carrier, grids from the envelopes */
    T = lvsi_malloc(ctx, nt * sizeof *T);
    double *w = lvsi_malloc(ctx, n * sizeof(double));
    if (!T || !w) { lvsi_free(ctx, w); st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (first order)"); goto fail; }
    decompose(tr->pulse, 1.0, 0.0, T);
    for (size_t k = 0; k < nt; k++) tr->numax = fmax(tr->numax, fabs(T[k].nu));
    for (size_t f = 0; f < n; f++) w[f] = tr->E[f] - tr->E[i];
    double q = 8;
    size_t envsteps = 0;
    for (;;) {
      if ((st = fo_terms(tr, T, nt, explicit_steps ? window / (double)explicit_steps : 0, q, w, A, D, &envsteps))) break;
      for (size_t f = 0; f < n; f++) tr->a[1][f] = -I * vcol[f] * A[f], tr->err[f] = cabs(vcol[f] * D[f]);
      rel = rel_err(tr, tr->a[1], tr->err, &lvl);
      if (explicit_steps || rel <= LVS_TRANSITION_RTOL || q >= 8192) break;
      q *= 2;
    }
    lvsi_free(ctx, w);
    if (st) goto fail;
    /* the one grid of second order and exact: a start, which second order
     * refines itself and exact raises to its own resolution */
    tr->steps = explicit_steps ? explicit_steps
                               : grid_for(window, wmax + tr->numax, 0.2, envsteps, (size_t)1 << 16);
    if (explicit_steps ? rel > 1e-3 : rel > LVS_TRANSITION_RTOL)
      warn_grid(tr, "first-order", rel, lvl, explicit_steps ? explicit_steps : envsteps, !explicit_steps);
    if (tr->order >= 2 && (st = sample_global(tr, &se, tr->steps, &S))) goto fail;
  } else {
    /* a Lua function (or a pulse of too many carriers): halve the grid until
     * the first-order amplitudes agree */
    size_t N = explicit_steps ? explicit_steps : 4096;
    /* field samples are n x n each: at most about 256 MB of them */
    size_t cap = (size_t)1 << 20;
    if (sp->src.field_fn && cap > ((size_t)1 << 24) / (n * n)) cap = ((size_t)1 << 24) / (n * n);
    if (cap < 4096) cap = 4096;
    if (N > cap) cap = N;
    for (;;) {
      if ((st = sample_global(tr, &se, N, &S)) || (st = fo_sampled(tr, &S, vcol))) goto fail;
      rel = rel_err(tr, tr->a[1], tr->err, &lvl);
      if (explicit_steps || rel <= LVS_TRANSITION_RTOL || 2 * N > cap) break;
      N *= 2;
    }
    tr->steps = N;
    if (explicit_steps ? rel > 1e-3 : rel > LVS_TRANSITION_RTOL)
      warn_grid(tr, "first-order", rel, lvl, N, !explicit_steps);
  }
  if (tr->order >= 2) {
    if (tr->vp && (st = dense_v(tr))) goto fail;
    S.V = tr->V;
    double complex *b = lvsi_calloc(ctx, n, sizeof(double complex));
    double *e2 = lvsi_calloc(ctx, n, sizeof(double));
    if (!b || !e2) { lvsi_free(ctx, b), lvsi_free(ctx, e2); st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory"); goto fail; }
    size_t cap = (size_t)1 << 21;
    if (sp->src.field_fn && cap > ((size_t)1 << 24) / (n * n)) cap = ((size_t)1 << 24) / (n * n);
    if (cap < 4096) cap = 4096;
    for (;;) {
      tr->steps = S.N;
      if ((st = second_order(tr, &S, 1, tr->a[2])) || (st = second_order(tr, &S, 2, b))) break;
      for (size_t f = 0; f < n; f++) e2[f] = cabs(tr->a[2][f] - b[f]);
      rel = rel_err(tr, tr->a[2], e2, &lvl);
      /* linear Filon is second order in h: the fine result is about 3x
       * better than this estimate */
      if (explicit_steps || rel <= 1e-4 || 2 * S.N > cap) break;
      if ((st = sample_global(tr, &se, 2 * S.N, &S))) break;
    }
    if (!st) {
      for (size_t f = 0; f < n; f++) tr->err[f] += e2[f];
      if (explicit_steps ? rel > 1e-2 : rel > 1e-4) warn_grid(tr, "second-order", rel, lvl, tr->steps, !explicit_steps);
    }
    lvsi_free(ctx, b), lvsi_free(ctx, e2);
    if (st) goto fail;
  }
  for (size_t f = 0; f < n; f++)
    for (int k = 1; k <= tr->order; k++)
      if (!isfinite(creal(tr->a[k][f])) || !isfinite(cimag(tr->a[k][f]))) {
        st = lvsi_fail(ctx, LVS_ERANGE, "transition: the order-%d amplitude to level %zu overflows (pulse or V too large)",
                       k, f + 1);
        goto fail;
      }
  for (size_t f = 0; f < n; f++)
    if (f != i && creal(tr->a[1][f] * conj(tr->a[1][f])) > 0.1) {
      add_warning(tr, "first-order probability exceeds 0.1: perturbation theory is not reliable here");
      break;
    }
  lvsi_free(ctx, T);
  lvsi_free(ctx, vcol);
  lvsi_free(ctx, S.Ws);
  lvsi_free(ctx, S.p);
  lvsi_free(ctx, se.tmp);
  *out = tr;
  return LVS_OK;
fail:
  lvsi_free(ctx, T);
  lvsi_free(ctx, vcol);
  lvsi_free(ctx, S.Ws);
  lvsi_free(ctx, S.p);
  lvsi_free(ctx, se.tmp);
  tr_free(tr);
  *out = NULL;
  return st;
}

/* One Magnus-4 propagation with m steps; psi in/out (Schroedinger picture). */
static int magnus(lvs_transition *tr, source_eval *se, size_t m, double complex *psi) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n;
  double h = (tr->t1 - tr->t0) / (double)m;
  int st = LVS_OK;
  double complex *buf = lvsi_malloc(ctx, 4 * n * n * sizeof(double complex));
  double complex *H1 = buf, *H2 = buf + n * n, *K = buf + 2 * n * n, *tmp = buf + 3 * n * n;
  double *lam = lvsi_malloc(ctx, n * sizeof(double));
  double complex *v = lvsi_malloc(ctx, n * sizeof(double complex));
  if (!buf || !lam || !v) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (exact)"); goto done; }
  const double g = sqrt(3.0) / 6.0, c2 = sqrt(3.0) * h * h / 12.0;
  for (size_t k = 0; k < m; k++) {
    double t = tr->t0 + (double)k * h;
    double complex *Hs[2] = {H1, H2};
    double ts[2] = {t + (0.5 - g) * h, t + (0.5 + g) * h};
    for (int q = 0; q < 2; q++) {
      double complex *Hq = Hs[q];
      if (tr->vp) {
        double p;
        if ((st = eval_scalar(se, ts[q], &p))) goto done;
        for (size_t e = 0; e < n * n; e++) Hq[e] = p * tr->V[e];
      } else if ((st = eval_field(se, ts[q], Hq))) goto done;
      for (size_t d = 0; d < n; d++) Hq[d + d * n] += tr->E[d];
    }
    /* K = h/2 (H1 + H2) + i c2 [H1, H2] */
    for (size_t e = 0; e < n * n; e++) K[e] = 0.5 * h * (H1[e] + H2[e]);
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        double complex acc = 0;
        for (size_t l = 0; l < n; l++) acc += H1[i + l * n] * H2[l + j * n] - H2[i + l * n] * H1[l + j * n];
        K[i + j * n] += I * c2 * acc;
      }
    lapack_int info = LAPACKE_zheev(LAPACK_COL_MAJOR, 'V', 'L', (lapack_int)n, (lapack_complex_double *)K,
                                    (lapack_int)n, lam);
    if (info != 0) { st = lvsi_fail(ctx, LVS_ELAPACK, "transition exact: zheev failed (info %d)", (int)info); goto done; }
    /* psi <- Z e^{-i lam} Z^H psi */
    for (size_t j = 0; j < n; j++) {
      double complex acc = 0;
      for (size_t l = 0; l < n; l++) acc += conj(K[l + j * n]) * psi[l];
      v[j] = acc * cexp(-I * lam[j]);
    }
    for (size_t l = 0; l < n; l++) {
      double complex acc = 0;
      for (size_t j = 0; j < n; j++) acc += K[l + j * n] * v[j];
      psi[l] = acc;
    }
    (void)tmp;
  }
done:
  lvsi_free(ctx, buf);
  lvsi_free(ctx, lam);
  lvsi_free(ctx, v);
  return st;
}

/* One classical RK4 run with m steps on the interaction-picture equation
 * dc/dt = -i p(t) D V D^* c, D = e^{iEt}; c(t0) = e_from, out: c(t1).
 * Each step works in the frame of its own start t_n (the RK4 combination is
 * linear, so conjugating by the constant D(t_n) changes nothing): the stage
 * phases are then the fixed e^{+-iEh/2}, e^{+-iEh}, and the state is carried
 * as x = D(t_n)^* c, advanced by e^{-iEh} at the end of each step. V is read
 * by rows (gather), fused with the stage combinations. */
typedef struct {
  const size_t *rp, *ci; /* rows of V: columns ci[rp[r]..rp[r+1]) */
  const double *rv;      /* values, interleaved complex */
} vrows;

/* k = -i p Dp V Dm x_in (Dp = Dm = NULL at the step start); then
 * acc += wacc k, x_out = x + wout k (x_out may be NULL). */
static inline __attribute__((always_inline)) void rk4_stage(size_t n, const vrows *V, const double *Dp, double p, const double *x_in, double *u,
                      const double *x, double *acc, double wacc, double *x_out, double wout) {
  const double *src = x_in;
  if (Dp) { /* u = conj(Dp) x_in */
    for (size_t q = 0; q < n; q++) {
      double dr = Dp[2 * q], di = Dp[2 * q + 1], yr = x_in[2 * q], yi = x_in[2 * q + 1];
      u[2 * q] = dr * yr + di * yi, u[2 * q + 1] = dr * yi - di * yr;
    }
    src = u;
  }
  for (size_t r = 0; r < n; r++) {
    double wr = 0, wi = 0;
    for (size_t e = V->rp[r]; e < V->rp[r + 1]; e++) {
      size_t c = V->ci[e];
      double vr = V->rv[2 * e], vi = V->rv[2 * e + 1], ur = src[2 * c], ui = src[2 * c + 1];
      wr += vr * ur - vi * ui, wi += vr * ui + vi * ur;
    }
    if (Dp) {
      double dr = Dp[2 * r], di = Dp[2 * r + 1], zr = dr * wr - di * wi, zi = dr * wi + di * wr;
      wr = zr, wi = zi;
    }
    double kr = p * wi, ki = -p * wr; /* -i p w */
    acc[2 * r] += wacc * kr, acc[2 * r + 1] += wacc * ki;
    if (x_out) x_out[2 * r] = x[2 * r] + wout * kr, x_out[2 * r + 1] = x[2 * r + 1] + wout * ki;
  }
}

/* the RK4 time loop; x in/out; ws scratch (y, u, acc: 6n doubles) */
typedef struct {
  const vrows *V;
  const double *Eh, *E1, *Em;
} rk4_consts;

static inline __attribute__((always_inline)) int rk4_loop(lvs_transition *tr, source_eval *se, size_t m, double h,
                                                          const rk4_consts *K, double *x, double *y, double *u,
                                                          double *acc) {
  size_t n = tr->n;
  const vrows V = *K->V;
  const double *Eh = K->Eh, *E1 = K->E1, *Em = K->Em;
  double p0, pm, p1;
  int st = eval_scalar(se, tr->t0, &p0);
  for (size_t s = 0; s < m && !st; s++) {
    if ((s & 255) == 255 && (st = lvsi_fence(tr->ctx, "transition (propagation)"))) break;
    double t = tr->t0 + (double)s * h;
    if ((st = eval_scalar(se, t + h / 2, &pm)) || (st = eval_scalar(se, s + 1 == m ? tr->t1 : t + h, &p1))) break;
    for (size_t q = 0; q < 2 * n; q++) acc[q] = 0;
    rk4_stage(n, &V, NULL, p0, x, u, x, acc, 1, y, 0.5 * h); /* k1 */
    rk4_stage(n, &V, Eh, pm, y, u, x, acc, 2, y, 0.5 * h);   /* k2 (reads y, writes y after use) */
    rk4_stage(n, &V, Eh, pm, y, u, x, acc, 2, y, h);         /* k3 */
    rk4_stage(n, &V, E1, p1, y, u, x, acc, 1, NULL, 0);      /* k4 */
    for (size_t q = 0; q < n; q++) { /* x <- e^{-iEh} (x + h/6 acc) */
      double zr = x[2 * q] + h / 6 * acc[2 * q], zi = x[2 * q + 1] + h / 6 * acc[2 * q + 1];
      double er = Em[2 * q], ei = Em[2 * q + 1];
      x[2 * q] = er * zr - ei * zi, x[2 * q + 1] = er * zi + ei * zr;
    }
    p0 = p1;
  }
  return st;
}

static int rk4_loop_plain(lvs_transition *tr, source_eval *se, size_t m, double h, const rk4_consts *K, double *x,
                          double *y, double *u, double *acc) {
  return rk4_loop(tr, se, m, h, K, x, y, u, acc);
}
#ifdef LVS_HAVE_AVX2_PATH
__attribute__((target("avx2,fma"))) static int rk4_loop_avx2(lvs_transition *tr, source_eval *se, size_t m, double h,
                                                              const rk4_consts *K, double *x, double *y, double *u,
                                                              double *acc) {
  return rk4_loop(tr, se, m, h, K, x, y, u, acc);
}
#endif

static int rk4_run(lvs_transition *tr, source_eval *se, size_t m, double complex *cout) {
  lvs_ctx *ctx = tr->ctx;
  size_t n = tr->n, nnz = tr->nnz;
  double h = (tr->t1 - tr->t0) / (double)m;
  double *ws = lvsi_malloc(ctx, (14 * n + 2 * nnz + 2) * sizeof(double));
  size_t *rp = lvsi_malloc(ctx, (n + 1) * sizeof(size_t)), *ci = lvsi_malloc(ctx, (nnz + 1) * sizeof(size_t));
  if (!ws || !rp || !ci) {
    lvsi_free(ctx, ws), lvsi_free(ctx, rp), lvsi_free(ctx, ci);
    return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (exact)");
  }
  double *x = ws, *y = ws + 2 * n, *u = ws + 4 * n, *acc = ws + 6 * n, *Eh = ws + 8 * n, *E1 = ws + 10 * n,
         *Em = ws + 12 * n, *rv = ws + 14 * n;
  /* rows of V from its columns (counting sort keeps columns ascending) */
  for (size_t r = 0; r <= n; r++) rp[r] = 0;
  for (size_t e = 0; e < nnz; e++) rp[tr->vi[e] + 1]++;
  for (size_t r = 0; r < n; r++) rp[r + 1] += rp[r];
  for (size_t j = 0; j < n; j++)
    for (size_t e = tr->vp[j]; e < tr->vp[j + 1]; e++) {
      size_t r = tr->vi[e], d = rp[r]++;
      ci[d] = j, rv[2 * d] = creal(tr->vv[e]), rv[2 * d + 1] = cimag(tr->vv[e]);
    }
  for (size_t r = n; r > 0; r--) rp[r] = rp[r - 1];
  rp[0] = 0;
  vrows V = {rp, ci, rv};
  for (size_t q = 0; q < n; q++) {
    double a = tr->E[q] * h;
    Eh[2 * q] = cos(a / 2), Eh[2 * q + 1] = sin(a / 2); /* e^{iEh/2} */
    E1[2 * q] = cos(a), E1[2 * q + 1] = sin(a);         /* e^{iEh} */
    Em[2 * q] = cos(a), Em[2 * q + 1] = -sin(a);        /* e^{-iEh} */
  }
  for (size_t q = 0; q < 2 * n; q++) x[q] = 0;
  x[2 * tr->from] = 1;
  unsigned csr;
  FTZ_ON(csr);
  rk4_consts K = {&V, Eh, E1, Em};
  int st;
#ifdef LVS_HAVE_AVX2_PATH
  __builtin_cpu_init();
  if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma"))
    st = rk4_loop_avx2(tr, se, m, h, &K, x, y, u, acc);
  else
#endif
    st = rk4_loop_plain(tr, se, m, h, &K, x, y, u, acc);
  FTZ_OFF(csr);
  if (!st) { /* c(t1) = D(t1) x, with x carried from D(t0) = e^{iE t0} */
    for (size_t q = 0; q < n; q++) {
      double complex d = cexp(I * tr->E[q] * tr->t1) * cexp(-I * tr->E[tr->from] * tr->t0);
      cout[q] = d * (x[2 * q] + I * x[2 * q + 1]);
    }
  }
  lvsi_free(ctx, ws), lvsi_free(ctx, rp), lvsi_free(ctx, ci);
  return st;
}

/* One Magnus-4 run with m steps, returned as interaction-picture amplitudes. */
static int magnus_run(lvs_transition *tr, source_eval *se, size_t m, double complex *cout) {
  size_t n = tr->n;
  for (size_t q = 0; q < n; q++) cout[q] = 0;
  cout[tr->from] = cexp(-I * tr->E[tr->from] * tr->t0);
  int st = magnus(tr, se, m, cout);
  if (!st)
    for (size_t q = 0; q < n; q++) cout[q] *= cexp(I * tr->E[q] * tr->t1);
  return st;
}

int lvs_transition_exact(lvs_transition *tr, const lvs_transition_source *src, const lvs_exact_spec *es,
                         lvs_transition **out) {
  lvs_ctx *ctx = tr->ctx;
  *out = NULL;
  lvs_exact_spec dflt = {LVS_EXACT_AUTO, 0, 0.0, 0};
  if (!es) es = &dflt;
  if (tr->exact) return lvsi_fail(ctx, LVS_EINVAL, "transition: already an exact result");
  if (!tr->pulse && !src->pulse_fn && !src->field_fn)
    return lvsi_fail(ctx, LVS_EINVAL, "transition exact: the pulse or perturbation function is missing");
  int method = es->method;
  if (method == LVS_EXACT_AUTO) method = tr->vp ? LVS_EXACT_RK4 : LVS_EXACT_MAGNUS4;
  if (method != LVS_EXACT_RK4 && method != LVS_EXACT_MAGNUS4)
    return lvsi_fail(ctx, LVS_EINVAL, "transition exact: unknown method %d", es->method);
  if (method == LVS_EXACT_RK4 && !tr->vp)
    return lvsi_fail(ctx, LVS_EINVAL, "transition exact: method rk4 needs V with a pulse (V(t) is a function here)");
  if (!(es->tol >= 0) || isinf(es->tol)) return lvsi_fail(ctx, LVS_EINVAL, "transition exact: tol must be >= 0, got %g", es->tol);
  size_t n = tr->n, i = tr->from;
  int st = LVS_OK;
  if (method == LVS_EXACT_MAGNUS4 && tr->vp && (st = dense_v(tr))) return st;
  source_eval se = {tr, src, NULL, NULL};
  lvs_transition *ex = lvsi_calloc(ctx, 1, sizeof *ex);
  double complex *c = lvsi_calloc(ctx, 2 * n, sizeof(double complex));
  if (!tr->vp) se.tmp = lvsi_malloc(ctx, 2 * n * n * sizeof(double complex));
  if (!ex || !c || (!tr->vp && !se.tmp)) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (exact)"); goto fail; }
  if (se.tmp) se.tmp2 = se.tmp + n * n;
  ex->ctx = ctx, ex->n = n, ex->from = i, ex->order = 0, ex->exact = 1;
  ex->t0 = tr->t0, ex->t1 = tr->t1;
  ex->a[0] = lvsi_calloc(ctx, n, sizeof(double complex));
  ex->err = lvsi_calloc(ctx, n, sizeof(double));
  if (!ex->a[0] || !ex->err) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (exact)"); goto fail; }
  int (*run)(lvs_transition *, source_eval *, size_t, double complex *) =
      method == LVS_EXACT_RK4 ? rk4_run : magnus_run;
  double complex *fine = c, *coarse = c + n;
  size_t m;
  double est = 0;
  if (es->tol > 0) { /* raise the steps until the Richardson estimate is below tol */
    m = es->steps;
    if (!m) { /* about 0.25 rad of the fastest coupled Bohr frequency per step */
      double wmax = 0;
      for (size_t j = 0; tr->vp && j < n; j++)
        for (size_t e = tr->vp[j]; e < tr->vp[j + 1]; e++) wmax = fmax(wmax, fabs(tr->E[tr->vi[e]] - tr->E[j]));
      double want = (tr->t1 - tr->t0) * wmax / 0.25;
      m = want < 64 ? 64 : want > (double)LVS_EXACT_MAX_STEPS ? LVS_EXACT_MAX_STEPS : (size_t)want;
    }
    size_t cap = es->max_steps && es->max_steps < LVS_EXACT_MAX_STEPS ? es->max_steps : LVS_EXACT_MAX_STEPS;
    if (m > cap / 2) m = cap / 2;
    if (m < 8) m = 8;
    /* runs at m and 2m give the error constant of this 4th-order method;
     * later counts are predicted from it (growth clamped to x2..x16), and
     * each new run is checked against the previous one by Richardson with
     * the actual ratio r: error ~ |c_new - c_old| / (r^4 - 1) */
    if ((st = run(tr, &se, m, coarse))) goto fail;
    size_t mnew = 2 * m;
    for (;;) {
      if (mnew > cap && m < cap) mnew = cap; /* one last try at the cap */
      if (mnew > cap) {
        st = lvsi_fail(ctx, LVS_ENOCONV, "transition exact: no convergence to tol %g within %zu steps (error estimate %.3g)",
                       es->tol, cap, est);
        goto fail;
      }
      if ((st = run(tr, &se, mnew, fine))) goto fail;
      double r = (double)mnew / (double)m, r4 = r * r * r * r;
      est = 0;
      for (size_t f = 0; f < n; f++) est = fmax(est, cabs(fine[f] - coarse[f]) / (r4 - 1));
      ex->steps = m; /* the comparison run, for the error below */
      m = mnew;
      if (est <= es->tol) break;
      double grow = 1.2 * pow(est / es->tol, 0.25);
      grow = grow < 2 ? 2 : grow > 16 ? 16 : grow;
      mnew = (size_t)ceil((double)m * grow);
      double complex *t = fine;
      fine = coarse, coarse = t;
    }
    /* error per amplitude from the last pair */
    double r = (double)m / (double)ex->steps, r4 = r * r * r * r;
    for (size_t f = 0; f < n; f++) ex->err[f] = cabs(fine[f] - coarse[f]) / (r4 - 1);
  } else {
    /* default: the grid of tr, but at least 0.2 rad per step of the fastest
     * coupled Bohr frequency plus carrier */
    m = es->steps ? es->steps : grid_for(tr->t1 - tr->t0, bohr_max(tr) + tr->numax, 0.2, 0, (size_t)1 << 18);
    if (!es->steps && m < tr->steps) m = tr->steps < ((size_t)1 << 18) ? tr->steps : (size_t)1 << 18;
    if (m < 8) m = 8;
    m = (m + 1) / 2 * 2;
    if ((st = run(tr, &se, m, fine)) || (st = run(tr, &se, m / 2, coarse))) goto fail;
    for (size_t f = 0; f < n; f++) ex->err[f] = cabs(fine[f] - coarse[f]) / 15.0;
  }
  ex->steps = m;
  for (size_t f = 0; f < n; f++) {
    ex->a[0][f] = fine[f];
    est = fmax(est, ex->err[f]);
  }
  if (est > 1e-6) {
    char msg[200];
    snprintf(msg, sizeof msg, "exact propagation error estimate %.2g with %zu steps: give more steps or a tol", est, m);
    add_warning(ex, msg);
  }
  /* compare with perturbation theory: a level disagrees when the two differ
   * by more than 10% of the exact probability and 1% of the largest
   * probability (a second-order effect far below the main transition is
   * not first order's failure); name the level with the largest difference */
  double Pbig = 0;
  for (size_t f = 0; f < n; f++) {
    if (f == i) continue;
    double complex pt = tr->a[1][f] + (tr->order >= 2 ? tr->a[2][f] : 0);
    Pbig = fmax(Pbig, fmax(creal(pt * conj(pt)), creal(ex->a[0][f] * conj(ex->a[0][f]))));
  }
  size_t worst = SIZE_MAX;
  double dworst = 0, Pw = 0, Ew = 0;
  for (size_t f = 0; f < n; f++) {
    if (f == i) continue;
    double complex pt = tr->a[1][f] + (tr->order >= 2 ? tr->a[2][f] : 0);
    double Ppt = creal(pt * conj(pt)), Pex = creal(ex->a[0][f] * conj(ex->a[0][f])), d = fabs(Ppt - Pex);
    if (d > 0.1 * Pex + 0.01 * Pbig + 1e-12 && d > dworst) worst = f, dworst = d, Pw = Ppt, Ew = Pex;
  }
  if (worst != SIZE_MAX) {
    char msg[200];
    snprintf(msg, sizeof msg, "perturbation theory and exact propagation disagree (level %zu: %.4g vs %.4g)",
             worst + 1, Pw, Ew);
    add_warning(tr, msg);
    add_warning(ex, msg);
  }
  lvsi_free(ctx, c);
  lvsi_free(ctx, se.tmp);
  *out = ex;
  return LVS_OK;
fail:
  lvsi_free(ctx, c);
  lvsi_free(ctx, se.tmp);
  tr_free(ex);
  return st;
}

size_t lvs_transition_steps(const lvs_transition *tr) { return tr->steps; }

size_t lvs_transition_dim(const lvs_transition *tr) { return tr->n; }
int lvs_transition_order(const lvs_transition *tr) { return tr->exact ? 0 : tr->order; }
const char *lvs_transition_warnings(const lvs_transition *tr) { return tr->warn; }
const double *lvs_transition_energies(const lvs_transition *tr) { return tr->E; }

int lvs_transition_amplitude(const lvs_transition *tr, size_t to, int order, double *re, double *im) {
  if (to >= tr->n)
    return lvsi_fail(tr->ctx, LVS_ERANGE, "transition: level %zu is out of range 1..%zu", to + 1, tr->n);
  double complex z;
  if (tr->exact) z = tr->a[0][to];
  else {
    if (order < 0) order = tr->order;
    if (order > tr->order)
      return lvsi_fail(tr->ctx, LVS_ERANGE, "transition: order %d was not computed (order = %d)", order, tr->order);
    z = 0;
    for (int k = 0; k <= order; k++) z += tr->a[k][to];
  }
  *re = creal(z), *im = cimag(z);
  return LVS_OK;
}

int lvs_transition_error(const lvs_transition *tr, size_t to, double *err) {
  if (to >= tr->n)
    return lvsi_fail(tr->ctx, LVS_ERANGE, "transition: level %zu is out of range 1..%zu", to + 1, tr->n);
  *err = tr->err[to];
  return LVS_OK;
}
