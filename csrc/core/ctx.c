/* ctx.c -- contexts, allocation through the user's allocator, errors. */
#include <stdint.h>
#include <time.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

static void *default_alloc(void *ud, void *ptr, size_t osize, size_t nsize) {
  (void)ud;
  (void)osize;
  if (nsize == 0) {
    free(ptr);
    return NULL;
  }
  return realloc(ptr, nsize);
}

const char *lvs_version(void) { return LVS_VERSION; }

lvs_ctx *lvs_ctx_new(lvs_alloc_fn alloc, void *ud) {
  if (!alloc) alloc = default_alloc;
  lvs_ctx *c = alloc(ud, NULL, 0, sizeof *c);
  if (!c) return NULL;
  memset(c, 0, sizeof *c);
  c->alloc = alloc;
  c->ud = ud;
  c->dense_cap = LVS_DEFAULT_DENSE_CAP;
  return c;
}

void lvs_ctx_free(lvs_ctx *ctx) {
  if (ctx) ctx->alloc(ctx->ud, ctx, sizeof *ctx, 0);
}

int lvs_errcode(const lvs_ctx *ctx) { return ctx ? ctx->code : LVS_EINVAL; }
const char *lvs_errmsg(const lvs_ctx *ctx) { return ctx ? ctx->msg : "no context"; }
void lvs_clear_error(lvs_ctx *ctx) {
  if (ctx) {
    ctx->code = LVS_OK;
    ctx->msg[0] = 0;
  }
}

const char *lvs_strerror(int code) {
  switch (code) {
    case LVS_OK: return "success";
    case LVS_ENOMEM: return "out of memory";
    case LVS_EINVAL: return "invalid argument";
    case LVS_EDIM: return "dimension mismatch";
    case LVS_ERANGE: return "out of range";
    case LVS_ENOCONV: return "no convergence";
    case LVS_ELAPACK: return "LAPACK failure";
    case LVS_ECAP: return "dense size cap exceeded";
    case LVS_ENOTHERM: return "matrix is not Hermitian";
    case LVS_ESTOP: return "stopped by the host's fence";
    default: return "unknown error";
  }
}

void lvs_ctx_set_dense_cap(lvs_ctx *ctx, size_t bytes) { ctx->dense_cap = bytes; }

void lvs_ctx_set_fence(lvs_ctx *ctx, lvs_fence *fence) {
  if (ctx) ctx->fence = fence;
}

double lvs_monotonic(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

int lvsi_fence(lvs_ctx *ctx, const char *where) {
  lvs_fence *f = ctx ? ctx->fence : NULL;
  if (!f) return LVS_OK;
  if (f->interrupt) return lvsi_fail(ctx, LVS_ESTOP, "interrupted by the host in %s", where);
  if (f->deadline > 0 && lvs_monotonic() >= f->deadline)
    return lvsi_fail(ctx, LVS_ESTOP, "deadline of %g s exceeded in %s", f->seconds, where);
  return LVS_OK;
}

int lvsi_fence_cost(lvs_ctx *ctx, double flops, const char *where) {
  int st = lvsi_fence(ctx, where);
  lvs_fence *f = ctx ? ctx->fence : NULL;
  if (st || !f || !(f->deadline > 0)) return st;
  double left = f->deadline - lvs_monotonic(), need = flops / LVS_FENCE_FLOPS;
  if (need > left)
    return lvsi_fail(ctx, LVS_ESTOP,
                     "deadline of %g s: %s needs about %.3g s at %.3g flop/s (%.3g flop), more than the %.3g s left; "
                     "refused before it started",
                     f->seconds, where, need, LVS_FENCE_FLOPS, flops, left > 0 ? left : 0.0);
  return LVS_OK;
}
size_t lvs_ctx_dense_cap(const lvs_ctx *ctx) { return ctx->dense_cap; }

/* The one place every failure passes: set a breakpoint here. */
int lvsi_fail(lvs_ctx *ctx, int code, const char *fmt, ...) {
  if (!ctx) return code;
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(ctx->msg, sizeof ctx->msg, fmt, ap);
  va_end(ap);
  if (code == LVS_ENOMEM && ctx->refused) { /* say why: a block above the cap */
    size_t len = strlen(ctx->msg);
    snprintf(ctx->msg + len, sizeof ctx->msg - len,
             " (a single block of %.3g GB is above the dense cap of %.3g GB;"
             " raise it with ls.config{dense_cap = bytes} if the machine has the memory)",
             ctx->refused / 1e9, ctx->dense_cap / 1e9);
  }
  ctx->refused = 0;
  ctx->code = code;
  return code;
}

/* Blocks carry their size in a 16-byte header so that frees can report
 * osize to the user allocator (a memory cap needs it). */
#define HDR 16
void *lvsi_malloc(lvs_ctx *ctx, size_t size) {
  if (size > SIZE_MAX - HDR) return NULL;
  /* no single block beyond the dense cap: a size computed from user input
   * (states, grid points, steps) fails here instead of exhausting memory */
  if (size > ctx->dense_cap) {
    ctx->refused = size;
    return NULL;
  }
  unsigned char *p = ctx->alloc(ctx->ud, NULL, 0, size + HDR);
  if (!p) return NULL;
  memcpy(p, &size, sizeof size);
  return p + HDR;
}
void *lvsi_calloc(lvs_ctx *ctx, size_t n, size_t size) {
  if (size && n > SIZE_MAX / size) return NULL;
  void *p = lvsi_malloc(ctx, n * size);
  if (p) memset(p, 0, n * size);
  return p;
}
void lvsi_free(lvs_ctx *ctx, void *p) {
  if (!p) return;
  unsigned char *q = (unsigned char *)p - HDR;
  size_t size;
  memcpy(&size, q, sizeof size);
  ctx->alloc(ctx->ud, q, size + HDR, 0);
}

int lvsi_dense_ok(lvs_ctx *ctx, size_t n, size_t m, size_t elem, const char *what) {
  if ((m != 0 && n > SIZE_MAX / m) || (n != 0 && m != 0 && elem > SIZE_MAX / (n * m)))
    return lvsi_fail(ctx, LVS_ECAP, "%s: %zux%zu dense storage overflows size_t", what, n, m);
  size_t bytes = n * m * elem;
  if (bytes > ctx->dense_cap)
    return lvsi_fail(ctx, LVS_ECAP,
                     "%s: %zux%zu dense storage needs %.3g GB, above the dense cap of %.3g GB"
                     " (raise it with ls.config{dense_cap = bytes} if the machine has the memory)",
                     what, n, m, bytes / 1e9, ctx->dense_cap / 1e9);
  return LVS_OK;
}
