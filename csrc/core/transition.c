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
 * Second order: c1_m(t) by cumulative linear Filon on each interval (exact
 * in the oscillation, second order in W), then the outer integral the same
 * way (Dyson, Phys. Rev. 75, 486 (1949)); error again from halving.
 * Exact: 4th-order Magnus (Blanes, Casas, Oteo, Ros, Phys. Rep. 470, 151
 * (2009)) with two Gauss nodes per step, exp(-iK) by zheev per step.
 */
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

enum { P_GAUSS, P_SQUARE, P_SINE, P_RAMP, P_SUM };

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
  double complex *U;    /* n x n eigenvectors of H0 (columns), col-major */
  double complex *V;    /* V in the eigenbasis (NULL for a field) */
  lvs_pulse *pulse;     /* copy, or NULL */
  double complex *a[3]; /* amplitudes by order (a[0] = delta) or exact in a[0] */
  double *err;          /* error estimate per final level */
  size_t *perm;         /* sorting permutation of a diagonal H0 (setup only) */
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
  size_t steps = sp->steps ? sp->steps : 4000;
  if (steps < 8) steps = 8;
  steps = (steps + 3) / 4 * 4;
  if ((st = lvsi_dense_ok(ctx, n, n, sizeof(double complex), "transition (eigenvectors)"))) return st;
  lvs_transition *tr = lvsi_calloc(ctx, 1, sizeof *tr);
  if (!tr) return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)");
  tr->ctx = ctx, tr->n = n, tr->from = sp->from, tr->steps = steps, tr->order = sp->order;
  tr->t0 = t0, tr->t1 = t1;
  tr->E = lvsi_calloc(ctx, n, sizeof(double));
  tr->U = lvsi_calloc(ctx, n * n, sizeof(double complex));
  tr->err = lvsi_calloc(ctx, n, sizeof(double));
  for (int k = 0; k < 3; k++) tr->a[k] = lvsi_calloc(ctx, n, sizeof(double complex));
  if (!tr->E || !tr->U || !tr->err || !tr->a[0] || !tr->a[1] || !tr->a[2]) {
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
    if (!perm) { tr_free(tr); return lvsi_fail(ctx, LVS_ENOMEM, "out of memory (transition)"); }
    for (size_t i = 0; i < n; i++) perm[i] = i;
    for (size_t i = 1; i < n; i++) { /* insertion sort, stable */
      size_t v = perm[i], j = i;
      while (j > 0 && tr->E[perm[j - 1]] > tr->E[v]) perm[j] = perm[j - 1], j--;
      perm[j] = v;
    }
    double *E2 = lvsi_calloc(ctx, n, sizeof(double));
    if (!E2) { lvsi_free(ctx, perm); tr_free(tr); return lvsi_fail(ctx, LVS_ENOMEM, "out of memory"); }
    for (size_t i = 0; i < n; i++) E2[i] = tr->E[perm[i]], tr->U[perm[i] + i * n] = 1;
    lvsi_free(ctx, tr->E);
    tr->E = E2;
    tr->perm = perm; /* kept until V is transformed */
  } else {
    lvs_matrix *Z = NULL;
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
    tr->V = lvsi_calloc(ctx, n * n, sizeof(double complex));
    double complex *tmp = lvsi_calloc(ctx, n * n, sizeof(double complex));
    if (!tr->V || !tmp) { lvsi_free(ctx, tmp); tr_free(tr); return lvsi_fail(ctx, LVS_ENOMEM, "out of memory"); }
    for (size_t j = 0; j < n; j++)
      for (size_t i = 0; i < n; i++) {
        double re, im;
        lvs_matrix_get(sp->v, i, j, &re, &im);
        tmp[i + j * n] = re + I * im;
      }
    if (diag) { /* permutation only */
      for (size_t j = 0; j < n; j++)
        for (size_t i = 0; i < n; i++) {
          tr->V[i + j * n] = tmp[tr->perm[i] + tr->perm[j] * n];
        }
    } else {
      double complex *t2 = lvsi_calloc(ctx, n * n, sizeof(double complex));
      if (!t2) { lvsi_free(ctx, tmp); tr_free(tr); return lvsi_fail(ctx, LVS_ENOMEM, "out of memory"); }
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
      lvsi_free(ctx, t2);
    }
    lvsi_free(ctx, tmp);
  }
  lvsi_free(ctx, tr->perm);
  tr->perm = NULL;
  if (sp->pulse && (st = lvs_pulse_copy(sp->pulse, &tr->pulse))) { tr_free(tr); return st; }
  *out = tr;
  return LVS_OK;
}

int lvs_transition_new(lvs_ctx *ctx, const lvs_transition_spec *sp, lvs_transition **out) {
  lvs_transition *tr;
  int st = setup(ctx, sp, &tr);
  if (st) return st;
  size_t n = tr->n, N = tr->steps, i = tr->from;
  double h = (tr->t1 - tr->t0) / (double)N;
  samples S = {0};
  S.n = n;
  S.V = tr->V;
  source_eval se = {tr, &sp->src, NULL, NULL};
  double complex *F = NULL;
  if (sp->src.field_fn) {
    if ((st = lvsi_dense_ok(ctx, (N + 1) * n, n, sizeof(double complex), "transition (field samples)"))) goto fail;
    S.Ws = lvsi_malloc(ctx, (N + 1) * n * n * sizeof(double complex));
    se.tmp = lvsi_malloc(ctx, 2 * n * n * sizeof(double complex));
    if (!S.Ws || !se.tmp) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (field samples)"); goto fail; }
    se.tmp2 = se.tmp + n * n;
    for (size_t k = 0; k <= N; k++)
      if ((st = eval_field(&se, tr->t0 + (double)k * h, S.Ws + k * n * n))) goto fail;
  } else {
    S.p = lvsi_malloc(ctx, (N + 1) * sizeof(double));
    if (!S.p) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (pulse samples)"); goto fail; }
    for (size_t k = 0; k <= N; k++)
      if ((st = eval_scalar(&se, tr->t0 + (double)k * h, &S.p[k]))) goto fail;
  }
  /* first order */
  F = lvsi_malloc(ctx, (N + 1) * sizeof(double complex));
  if (!F) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory"); goto fail; }
  if (!S.Ws)
    for (size_t k = 0; k <= N; k++) F[k] = S.p[k];
  tr->a[0][i] = 1;
  for (size_t f = 0; f < n; f++) {
    double w = tr->E[f] - tr->E[i];
    double complex scale = 1;
    if (S.Ws) {
      for (size_t k = 0; k <= N; k++) F[k] = S.Ws[k * n * n + f + i * n];
    } else {
      scale = tr->V[f + i * n];
      if (scale == 0) continue;
    }
    double complex I1 = filon(F, 1, N, tr->t0, h, w), I2 = filon(F, 2, N / 2, tr->t0, 2 * h, w);
    tr->a[1][f] = -I * scale * I1;
    tr->err[f] = cabs(scale * (I1 - I2));
  }
  if (tr->order >= 2) {
    double complex *b = lvsi_calloc(ctx, n, sizeof(double complex));
    if (!b) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory"); goto fail; }
    if ((st = second_order(tr, &S, 1, tr->a[2])) || (st = second_order(tr, &S, 2, b))) { lvsi_free(ctx, b); goto fail; }
    for (size_t f = 0; f < n; f++) tr->err[f] += cabs(tr->a[2][f] - b[f]);
    lvsi_free(ctx, b);
  }
  for (size_t f = 0; f < n; f++)
    if (f != i && creal(tr->a[1][f] * conj(tr->a[1][f])) > 0.1) {
      add_warning(tr, "first-order probability exceeds 0.1: perturbation theory is not reliable here");
      break;
    }
  lvsi_free(ctx, F);
  lvsi_free(ctx, S.Ws);
  lvsi_free(ctx, S.p);
  lvsi_free(ctx, se.tmp);
  *out = tr;
  return LVS_OK;
fail:
  lvsi_free(ctx, F);
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
      if (tr->V) {
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

int lvs_transition_exact(lvs_transition *tr, const lvs_transition_source *src, size_t steps, lvs_transition **out) {
  lvs_ctx *ctx = tr->ctx;
  *out = NULL;
  if (tr->exact) return lvsi_fail(ctx, LVS_EINVAL, "transition: already an exact result");
  if (!tr->pulse && !src->pulse_fn && !src->field_fn)
    return lvsi_fail(ctx, LVS_EINVAL, "transition exact: the pulse or perturbation function is missing");
  size_t n = tr->n, i = tr->from;
  size_t m = steps ? steps : tr->steps;
  if (m < 8) m = 8;
  m = (m + 1) / 2 * 2;
  source_eval se = {tr, src, NULL, NULL};
  lvs_transition *ex = lvsi_calloc(ctx, 1, sizeof *ex);
  double complex *psi = lvsi_calloc(ctx, 2 * n, sizeof(double complex));
  if (!tr->V) se.tmp = lvsi_malloc(ctx, 2 * n * n * sizeof(double complex));
  int st = LVS_OK;
  if (!ex || !psi || (!tr->V && !se.tmp)) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (exact)"); goto fail; }
  if (se.tmp) se.tmp2 = se.tmp + n * n;
  ex->ctx = ctx, ex->n = n, ex->from = i, ex->steps = m, ex->order = 0, ex->exact = 1;
  ex->t0 = tr->t0, ex->t1 = tr->t1;
  ex->a[0] = lvsi_calloc(ctx, n, sizeof(double complex));
  ex->err = lvsi_calloc(ctx, n, sizeof(double));
  if (!ex->a[0] || !ex->err) { st = lvsi_fail(ctx, LVS_ENOMEM, "out of memory (exact)"); goto fail; }
  double complex *p1 = psi, *p2 = psi + n;
  p1[i] = p2[i] = cexp(-I * tr->E[i] * tr->t0);
  if ((st = magnus(tr, &se, m, p1)) || (st = magnus(tr, &se, m / 2, p2))) goto fail;
  for (size_t f = 0; f < n; f++) {
    double complex back = cexp(I * tr->E[f] * tr->t1);
    ex->a[0][f] = back * p1[f];
    ex->err[f] = cabs(p1[f] - p2[f]) / 15.0;
  }
  /* compare with perturbation theory */
  for (size_t f = 0; f < n; f++) {
    if (f == i) continue;
    double complex pt = tr->a[1][f] + (tr->order >= 2 ? tr->a[2][f] : 0);
    double Ppt = creal(pt * conj(pt)), Pex = creal(ex->a[0][f] * conj(ex->a[0][f]));
    if (fabs(Ppt - Pex) > 0.1 * Pex + 1e-4) {
      char msg[200];
      snprintf(msg, sizeof msg, "perturbation theory and exact propagation disagree (level %zu: %.4g vs %.4g)", f + 1,
               Ppt, Pex);
      add_warning(tr, msg);
      add_warning(ex, msg);
      break;
    }
  }
  lvsi_free(ctx, psi);
  lvsi_free(ctx, se.tmp);
  *out = ex;
  return LVS_OK;
fail:
  lvsi_free(ctx, psi);
  lvsi_free(ctx, se.tmp);
  tr_free(ex);
  return st;
}

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
