/* lmatrix.c -- binding of matrices (ops) and complex scalars.
 *
 * Arithmetic: + - * with ops and scalars (a scalar added to an op means
 * scalar * identity), / by a scalar, unary minus, ^ with a non-negative
 * integer. Scalars are Lua numbers or levelshift.complex values (ls.I). */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "bind/lbind.h"

/* ---- complex scalars ---------------------------------------------------- */

void lvsL_pushcomplex(lua_State *L, double re, double im) {
  double *z = lua_newuserdatauv(L, 2 * sizeof(double), 0);
  z[0] = re;
  z[1] = im;
  luaL_setmetatable(L, LVS_COMPLEX_MT);
}

int lvsL_toscalar(lua_State *L, int idx, double z[2]) {
  if (lua_type(L, idx) == LUA_TNUMBER) {
    z[0] = lua_tonumber(L, idx);
    z[1] = 0.0;
    return 1;
  }
  double *c = luaL_testudata(L, idx, LVS_COMPLEX_MT);
  if (c) {
    z[0] = c[0];
    z[1] = c[1];
    return 1;
  }
  return 0;
}

/* ---- matrices ------------------------------------------------------------ */

lvs_matrix **lvsL_newmatrix(lua_State *L) {
  lvsL_gcstep(L);
  /* p[0]: the matrix (NULL once closed); p[1]: one closed while a binding
   * was running below, freed by __gc (see lvsL_inside_binding); p[2]: an op
   * of a product basis still held as a site sum (p[0] NULL until something
   * needs its entries; see localsum.c) */
  lvs_matrix **p = lua_newuserdatauv(L, 3 * sizeof *p, 1);
  p[0] = p[1] = p[2] = NULL;
  luaL_setmetatable(L, LVS_MATRIX_MT);
  return p;
}

void lvsL_pushlocalsum(lua_State *L, lvs_localsum *s) {
  lvs_matrix **p = lvsL_newmatrix(L);
  p[2] = (lvs_matrix *)(void *)s;
}

lvs_localsum *lvsL_testlocalsum(lua_State *L, int idx) {
  lvs_matrix **p = luaL_testudata(L, idx, LVS_MATRIX_MT);
  return (p && !p[0]) ? (lvs_localsum *)(void *)p[2] : NULL;
}

/* the entries of a site sum, written out once (the op keeps them) */
static lvs_matrix *written_out(lua_State *L, int idx, lvs_matrix **p) {
  lvs_localsum *s = (lvs_localsum *)(void *)p[2];
  lvs_matrix *m;
  if (lvs_localsum_matrix(s, &m)) {
    lvs_ctx *ctx = lvs_localsum_ctx(s);
    lua_pushfstring(L, "writing out the operator: %s", lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    luaL_argerror(L, lua_absindex(L, idx), lua_tostring(L, -1));
  }
  p[0] = m;
  p[2] = NULL;
  lvs_localsum_free(s);
  return m;
}

lvs_matrix *lvsL_testmatrix(lua_State *L, int idx) {
  lvs_matrix **p = luaL_testudata(L, idx, LVS_MATRIX_MT);
  if (!p) return NULL;
  if (!*p && p[2]) return written_out(L, idx, p);
  if (!*p) luaL_argerror(L, idx, "attempt to use a closed matrix");
  return *p;
}

lvs_matrix *lvsL_checkmatrix(lua_State *L, int idx) {
  lvs_matrix **p = luaL_checkudata(L, idx, LVS_MATRIX_MT);
  if (!*p && p[2]) return written_out(L, idx, p);
  if (!*p) luaL_argerror(L, idx, "attempt to use a closed matrix");
  return *p;
}

static int l_close(lua_State *L) {
  lvs_matrix **p = luaL_checkudata(L, 1, LVS_MATRIX_MT);
  lvs_localsum_free((lvs_localsum *)(void *)p[2]); /* no binding holds a site sum */
  p[2] = NULL;
  if (*p && lvsL_inside_binding(L)) p[1] = *p; /* a caller below may hold it */
  else lvs_matrix_free(*p);
  *p = NULL;
  return 0;
}

static int l_gc(lua_State *L) {
  lvs_matrix **p = luaL_checkudata(L, 1, LVS_MATRIX_MT);
  if (lvsL_gc_by_hand(L)) return l_close(L); /* a script's call: maybe in use */
  lvs_matrix_free(p[0]);
  lvs_matrix_free(p[1]);
  lvs_localsum_free((lvs_localsum *)(void *)p[2]);
  p[0] = p[1] = p[2] = NULL;
  return 0;
}

static void checkfinite(lua_State *L, const double z[2], int arg) {
  if (!isfinite(z[0]) || !isfinite(z[1])) luaL_argerror(L, arg, "scalar is NaN or infinite");
}

/* a product of two site sums past this many terms is written out and
 * multiplied as ops (docs/api.md) */
#define SITE_SUM_PRODUCT_MAX 4096

/* Arithmetic of site sums (ops of a product basis not yet written out):
 * sums, differences, scalar multiples and products of two sums stay sums;
 * 1 with the result pushed, 0 when the operands need the general path
 * (a written-out op, another basis, a product past the term limit). */
static int site_sum_arith(lua_State *L, char op, const char *name, int sa, const double za[2], int sb,
                          const double zb[2]) {
  lvs_localsum *a = sa ? NULL : lvsL_testlocalsum(L, 1);
  lvs_localsum *b = sb ? NULL : lvsL_testlocalsum(L, 2);
  if ((!a && !sa) || (!b && !sb) || (sa && sb)) return 0;
  if (a && b && !lvs_localsum_compatible(a, b)) return 0;
  if (op == '/' && (!sb || (zb[0] == 0.0 && zb[1] == 0.0))) return 0; /* the general path's errors */
  if (op == '*' && a && b && lvs_localsum_terms(a) * lvs_localsum_terms(b) > SITE_SUM_PRODUCT_MAX) return 0;
  lvs_ctx *ctx = lvs_localsum_ctx(a ? a : b);
  lvs_matrix **out = lvsL_newmatrix(L); /* first: nothing leaks if it raises */
  const lvs_localsum *t[2] = {a, b};
  double c[2][2] = {{1, 0}, {1, 0}};
  if (sa) c[0][0] = za[0], c[0][1] = za[1];
  if (sb) c[1][0] = zb[0], c[1][1] = zb[1];
  lvs_localsum *r = NULL;
  int st;
  switch (op) {
    case '-':
      c[1][0] = -c[1][0];
      c[1][1] = -c[1][1];
      /* fall through */
    case '+':
      st = lvs_localsum_sum(ctx, 2, (const double (*)[2])c, t, &r);
      break;
    case '*':
      if (a && b) {
        st = lvs_localsum_mul(a, b, &r);
      } else {
        double z[2] = {sa ? za[0] : zb[0], sa ? za[1] : zb[1]};
        const lvs_localsum *one[1] = {a ? a : b};
        st = lvs_localsum_sum(ctx, 1, (const double (*)[2])&z, one, &r);
      }
      break;
    default: { /* '/' by a nonzero scalar */
      double d = zb[0] * zb[0] + zb[1] * zb[1];
      double z[2] = {zb[0] / d, -zb[1] / d};
      const lvs_localsum *one[1] = {a};
      st = lvs_localsum_sum(ctx, 1, (const double (*)[2])&z, one, &r);
      break;
    }
  }
  if (st == LVS_ECAP) { /* past the term limit: the general path */
    lvs_clear_error(ctx);
    lua_pop(L, 1);
    return 0;
  }
  lvsL_check(L, ctx, st, name);
  out[2] = (lvs_matrix *)(void *)r;
  return 1;
}

/* One arithmetic entry for both metatables: op is '+', '-', '*', '/'. */
static int arith(lua_State *L, char op, const char *name) {
  lvs_ctx *ctx = lvsL_ctx(L);
  double za[2], zb[2];
  int sa = lvsL_toscalar(L, 1, za), sb = lvsL_toscalar(L, 2, zb);
  if (!(sa && sb)) {
    if (sa) checkfinite(L, za, 1);
    if (sb) checkfinite(L, zb, 2);
    if (site_sum_arith(L, op, name, sa, za, sb, zb)) return 1;
  }
  lvs_matrix *a = sa ? NULL : lvsL_testmatrix(L, 1);
  lvs_matrix *b = sb ? NULL : lvsL_testmatrix(L, 2);
  if (!sa && !a) return luaL_typeerror(L, 1, "levelshift.matrix or number");
  if (!sb && !b) return luaL_typeerror(L, 2, "levelshift.matrix or number");
  if (sa && sb) { /* complex scalar arithmetic */
    double re = 0, im = 0;
    switch (op) {
      case '+': re = za[0] + zb[0]; im = za[1] + zb[1]; break;
      case '-': re = za[0] - zb[0]; im = za[1] - zb[1]; break;
      case '*': re = za[0] * zb[0] - za[1] * zb[1]; im = za[0] * zb[1] + za[1] * zb[0]; break;
      case '/': {
        double d = zb[0] * zb[0] + zb[1] * zb[1];
        if (d == 0.0) return luaL_error(L, "complex division by zero");
        re = (za[0] * zb[0] + za[1] * zb[1]) / d;
        im = (za[1] * zb[0] - za[0] * zb[1]) / d;
        break;
      }
    }
    lvsL_pushcomplex(L, re, im);
    return 1;
  }
  if (sa) checkfinite(L, za, 1);
  if (sb) checkfinite(L, zb, 2);
  lvs_matrix **out = lvsL_newmatrix(L);
  const double one[2] = {1, 0}, mone[2] = {-1, 0};
  int st = LVS_OK;
  switch (op) {
    case '+':
      if (a && b) {
        if (lvs_matrix_rows(a) != lvs_matrix_rows(b) || lvs_matrix_cols(a) != lvs_matrix_cols(b))
          return luaL_error(L, "%s: dimension mismatch: %dx%d vs %dx%d", name, (int)lvs_matrix_rows(a),
                            (int)lvs_matrix_cols(a), (int)lvs_matrix_rows(b), (int)lvs_matrix_cols(b));
        st = lvs_matrix_add(one, a, one, b, out);
      } else {
        st = lvs_matrix_shift(a ? a : b, a ? zb : za, out);
      }
      break;
    case '-':
      if (a && b) {
        if (lvs_matrix_rows(a) != lvs_matrix_rows(b) || lvs_matrix_cols(a) != lvs_matrix_cols(b))
          return luaL_error(L, "%s: dimension mismatch: %dx%d vs %dx%d", name, (int)lvs_matrix_rows(a),
                            (int)lvs_matrix_cols(a), (int)lvs_matrix_rows(b), (int)lvs_matrix_cols(b));
        st = lvs_matrix_add(one, a, mone, b, out);
      } else if (a) {
        double nz[2] = {-zb[0], -zb[1]};
        st = lvs_matrix_shift(a, nz, out);
      } else { /* s - B = -B + s */
        lvs_matrix *nb;
        st = lvs_matrix_scale(b, mone, &nb);
        if (!st) {
          st = lvs_matrix_shift(nb, za, out);
          lvs_matrix_free(nb);
        }
      }
      break;
    case '*':
      if (a && b) {
        if (lvs_matrix_cols(a) != lvs_matrix_rows(b))
          return luaL_error(L, "%s: dimension mismatch in product: %dx%d times %dx%d", name,
                            (int)lvs_matrix_rows(a), (int)lvs_matrix_cols(a), (int)lvs_matrix_rows(b),
                            (int)lvs_matrix_cols(b));
        st = lvs_matrix_mul(a, b, out);
      } else {
        st = lvs_matrix_scale(a ? a : b, a ? zb : za, out);
      }
      break;
    case '/':
      if (!sb) return luaL_argerror(L, 2, "can only divide a matrix by a number");
      if (zb[0] == 0.0 && zb[1] == 0.0) return luaL_argerror(L, 2, "division by zero");
      {
        double d = zb[0] * zb[0] + zb[1] * zb[1];
        double inv[2] = {zb[0] / d, -zb[1] / d};
        st = lvs_matrix_scale(a, inv, out);
      }
      break;
  }
  lvsL_check(L, ctx, st, name);
  return 1;
}

static int m_add(lua_State *L) { return arith(L, '+', "add"); }
static int m_sub(lua_State *L) { return arith(L, '-', "sub"); }
static int m_mul(lua_State *L) { return arith(L, '*', "mul"); }
static int m_div(lua_State *L) { return arith(L, '/', "div"); }

static int m_unm(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  double z[2];
  if (lvsL_toscalar(L, 1, z)) {
    lvsL_pushcomplex(L, -z[0], -z[1]);
    return 1;
  }
  const double mone[2] = {-1, 0};
  lvs_localsum *s = lvsL_testlocalsum(L, 1);
  if (s) {
    lvs_matrix **out = lvsL_newmatrix(L);
    lvs_localsum *r;
    const lvs_localsum *one[1] = {s};
    lvsL_check(L, ctx, lvs_localsum_sum(lvs_localsum_ctx(s), 1, &mone, one, &r), "unm");
    out[2] = (lvs_matrix *)(void *)r;
    return 1;
  }
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_scale(a, mone, out), "unm");
  return 1;
}

/* a site sum to the power k >= 1 by repeated products; 0 when the terms
 * would pass the limit (the general path then) */
static int site_sum_pow(lua_State *L, lvs_localsum *s, lua_Integer k) {
  lvs_ctx *ctx = lvs_localsum_ctx(s);
  lvs_matrix **out = lvsL_newmatrix(L);
  const double one[1][2] = {{1, 0}};
  const lvs_localsum *self[1] = {s};
  lvs_localsum *r = NULL, *t;
  int st = lvs_localsum_sum(ctx, 1, one, self, &r);
  for (lua_Integer q = 1; !st && q < k; q++) {
    if (lvs_localsum_terms(r) * lvs_localsum_terms(s) > SITE_SUM_PRODUCT_MAX) {
      st = LVS_ECAP;
      break;
    }
    st = lvs_localsum_mul(r, s, &t);
    lvs_localsum_free(r);
    r = st ? NULL : t;
  }
  if (st == LVS_ECAP) {
    lvs_clear_error(ctx);
    lvs_localsum_free(r);
    lua_pop(L, 1);
    return 0;
  }
  lvsL_check(L, ctx, st, "pow");
  out[2] = (lvs_matrix *)(void *)r;
  return 1;
}

static int m_pow(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int ok;
  lua_Integer k = lua_tointegerx(L, 2, &ok);
  luaL_argcheck(L, ok, 2, "power must be an integer");
  luaL_argcheck(L, k >= 0, 2, "power must be non-negative");
  luaL_argcheck(L, k <= 10000, 2, "power is absurdly large (above 10000)");
  lvs_localsum *s = lvsL_testlocalsum(L, 1);
  if (s && k > 0 && k <= 64 && site_sum_pow(L, s, k)) return 1;
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  if (lvs_matrix_rows(a) != lvs_matrix_cols(a))
    return luaL_argerror(L, 1, "power needs a square matrix");
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_pow(a, (int)k, out), "pow");
  return 1;
}

static size_t checkindex(lua_State *L, int arg, size_t n, const char *what) {
  int ok;
  lua_Integer i = lua_tointegerx(L, arg, &ok);
  if (!ok) {
    lua_pushfstring(L, "%s index must be an integer", what);
    luaL_argerror(L, arg, lua_tostring(L, -1));
  }
  if (i < 1 || (size_t)i > n) {
    lua_pushfstring(L, "%s index %d out of range 1..%d", what, (int)i, (int)n);
    luaL_argerror(L, arg, lua_tostring(L, -1));
  }
  return (size_t)(i - 1);
}

static int m_get(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  size_t i = checkindex(L, 2, lvs_matrix_rows(a), "row");
  size_t j = checkindex(L, 3, lvs_matrix_cols(a), "column");
  double re, im;
  lvsL_check(L, ctx, lvs_matrix_get(a, i, j, &re, &im), "get");
  lua_pushnumber(L, re);
  lua_pushnumber(L, im);
  return 2;
}

static int m_set(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  size_t i = checkindex(L, 2, lvs_matrix_rows(a), "row");
  size_t j = checkindex(L, 3, lvs_matrix_cols(a), "column");
  double z[2];
  if (!lvsL_toscalar(L, 4, z)) return luaL_typeerror(L, 4, "number or complex");
  if (!lua_isnoneornil(L, 5)) z[1] = luaL_checknumber(L, 5);
  if (!isfinite(z[0]) || !isfinite(z[1])) return luaL_argerror(L, 4, "value is NaN or infinite");
  lvsL_check(L, ctx, lvs_matrix_set(a, i, j, z[0], z[1]), "set");
  lua_settop(L, 1);
  return 1;
}

static int m_dim(lua_State *L) {
  lvs_localsum *s = lvsL_testlocalsum(L, 1);
  if (s) { /* known without writing it out */
    lua_pushinteger(L, (lua_Integer)lvs_localsum_dim(s));
    lua_pushinteger(L, (lua_Integer)lvs_localsum_dim(s));
    return 2;
  }
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  lua_pushinteger(L, (lua_Integer)lvs_matrix_rows(a));
  lua_pushinteger(L, (lua_Integer)lvs_matrix_cols(a));
  return 2;
}

static int m_adj(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_adj(a, out), "adj");
  return 1;
}

static int m_copy(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_copy(a, out), "copy");
  return 1;
}

static int m_is_hermitian(lua_State *L) {
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  double tol = luaL_optnumber(L, 2, 1e-12);
  luaL_argcheck(L, tol >= 0 && isfinite(tol), 2, "tolerance must be a finite non-negative number");
  size_t i, j;
  double d = lvs_matrix_hermitian_defect(a, &i, &j);
  /* relative to the op's largest entry, as the solvers judge it: (x^4) on
   * 100 oscillator levels has entries ~1e4 and rounding defects ~1e-12 */
  double big = lvs_matrix_max_abs(a);
  lua_pushboolean(L, d <= tol * (big > 0 ? big : 1.0));
  lua_pushnumber(L, d);
  return 2;
}

static int m_is_complex(lua_State *L) {
  lua_pushboolean(L, lvs_matrix_is_complex(lvsL_checkmatrix(L, 1)));
  return 1;
}

static int m_storage(lua_State *L) {
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  lua_pushstring(L, lvs_matrix_is_sparse(a) ? "sparse" : "dense");
  lua_pushinteger(L, (lua_Integer)lvs_matrix_nnz(a));
  return 2;
}

static int m_trace(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  if (lvs_matrix_rows(a) != lvs_matrix_cols(a)) return luaL_argerror(L, 1, "trace needs a square matrix");
  double sr = 0, si = 0, re, im;
  for (size_t i = 0; i < lvs_matrix_rows(a); i++) {
    lvsL_check(L, ctx, lvs_matrix_get(a, i, i, &re, &im), "trace");
    sr += re;
    si += im;
  }
  lua_pushnumber(L, sr);
  lua_pushnumber(L, si);
  return 2;
}

/* m:dot(v) -> <m|v> for column vectors (re, im) */
static int m_dot(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1), *b = lvsL_checkmatrix(L, 2);
  size_t n = lvs_matrix_rows(a);
  if (lvs_matrix_cols(a) != 1 || lvs_matrix_cols(b) != 1 || lvs_matrix_rows(b) != n)
    return luaL_error(L, "dot: need two column vectors of one length, got %dx%d and %dx%d", (int)n,
                      (int)lvs_matrix_cols(a), (int)lvs_matrix_rows(b), (int)lvs_matrix_cols(b));
  double sr = 0, si = 0, ar, ai, br, bi;
  for (size_t i = 0; i < n; i++) {
    lvsL_check(L, ctx, lvs_matrix_get(a, i, 0, &ar, &ai), "dot");
    lvsL_check(L, ctx, lvs_matrix_get(b, i, 0, &br, &bi), "dot");
    sr += ar * br + ai * bi;
    si += ar * bi - ai * br;
  }
  lua_pushnumber(L, sr);
  lua_pushnumber(L, si);
  return 2;
}

static void fmtnum(char *buf, size_t len, double re, double im, int cplx) {
  if (fabs(re) < 5e-15) re = 0.0;
  if (fabs(im) < 5e-15) im = 0.0;
  if (!cplx)
    snprintf(buf, len, "%10.6g", re);
  else
    snprintf(buf, len, "%10.6g%+.6gi", re, im);
}

static int m_tostring(lua_State *L) {
  lvs_matrix **p = luaL_checkudata(L, 1, LVS_MATRIX_MT);
  if (!*p && p[2]) lvsL_checkmatrix(L, 1); /* a site sum: written out */
  if (!*p) {
    lua_pushstring(L, "levelshift.matrix (closed)");
    return 1;
  }
  lvs_matrix *a = *p;
  size_t r = lvs_matrix_rows(a), c = lvs_matrix_cols(a);
  int cplx = lvs_matrix_is_complex(a);
  luaL_Buffer b;
  luaL_buffinit(L, &b);
  lua_pushfstring(L, "levelshift.matrix %dx%d %s %s", (int)r, (int)c, cplx ? "complex" : "real",
                  lvs_matrix_is_sparse(a) ? "sparse" : "dense");
  luaL_addvalue(&b);
  if (r <= 12 && c <= 8) {
    char buf[64];
    for (size_t i = 0; i < r; i++) {
      luaL_addstring(&b, "\n ");
      for (size_t j = 0; j < c; j++) {
        double re, im;
        lvs_matrix_get(a, i, j, &re, &im);
        fmtnum(buf, sizeof buf, re, im, cplx);
        luaL_addchar(&b, ' ');
        luaL_addstring(&b, buf);
      }
    }
  }
  luaL_pushresult(&b);
  return 1;
}

/* ls.matrix{{...}, ...}: rows of numbers or complex values */
static int l_matrix(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  luaL_checktype(L, 1, LUA_TTABLE);
  lua_Integer r = luaL_len(L, 1);
  luaL_argcheck(L, r > 0, 1, "matrix needs at least one row");
  lua_Integer c = -1;
  int cplx = 0;
  for (lua_Integer i = 1; i <= r; i++) {
    if (lua_geti(L, 1, i) != LUA_TTABLE) {
      lua_pushfstring(L, "row %d is not a table", (int)i);
      return luaL_argerror(L, 1, lua_tostring(L, -1));
    }
    lua_Integer len = luaL_len(L, -1);
    if (c < 0) c = len;
    if (len != c || len == 0) {
      lua_pushfstring(L, "row %d has %d entries, expected %d", (int)i, (int)len, (int)c);
      return luaL_argerror(L, 1, lua_tostring(L, -1));
    }
    for (lua_Integer j = 1; j <= c; j++) {
      lua_geti(L, -1, j);
      double z[2];
      if (!lvsL_toscalar(L, -1, z)) {
        lua_pushfstring(L, "entry (%d, %d) is not a number", (int)i, (int)j);
        return luaL_argerror(L, 1, lua_tostring(L, -1));
      }
      if (!isfinite(z[0]) || !isfinite(z[1])) {
        lua_pushfstring(L, "entry (%d, %d) is NaN or infinite", (int)i, (int)j);
        return luaL_argerror(L, 1, lua_tostring(L, -1));
      }
      if (z[1] != 0.0) cplx = 1;
      lua_pop(L, 1);
    }
    lua_pop(L, 1);
  }
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_new(ctx, (size_t)r, (size_t)c, cplx, out), "matrix");
  for (lua_Integer i = 1; i <= r; i++) {
    lua_geti(L, 1, i);
    for (lua_Integer j = 1; j <= c; j++) {
      double z[2];
      lua_geti(L, -1, j);
      lvsL_toscalar(L, -1, z);
      lvs_matrix_set(*out, (size_t)i - 1, (size_t)j - 1, z[0], z[1]);
      lua_pop(L, 1);
    }
    lua_pop(L, 1);
  }
  return 1;
}

/* ls.zeros(rows [, cols [, "complex"]]) */
static int l_zeros(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lua_Integer r = luaL_checkinteger(L, 1);
  lua_Integer c = luaL_optinteger(L, 2, r);
  luaL_argcheck(L, r > 0, 1, "size must be positive");
  luaL_argcheck(L, c > 0, 2, "size must be positive");
  int cplx = lua_toboolean(L, 3);
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_new_sparse(ctx, (size_t)r, (size_t)c, cplx, out), "zeros");
  return 1;
}

/* ls._sum_terms(list): the sum of a sequence of ops and scalars (a scalar
 * means scalar times the identity) in one pass (lvs_matrix_sum); ls.sum
 * hands it batches of its terms. */
/* _sum_terms of site sums only (scalars as identity terms): a site sum;
 * 0 when a term is anything else or lives on another basis */
static int sum_site_terms(lua_State *L, lua_Integer n) {
  const lvs_localsum *first = NULL;
  for (lua_Integer k = 1; k <= n; k++) {
    lua_rawgeti(L, 1, k);
    double z[2];
    int isnum = lvsL_toscalar(L, -1, z);
    const lvs_localsum *s = isnum ? NULL : lvsL_testlocalsum(L, -1);
    int scalar = isnum && isfinite(z[0]) && isfinite(z[1]);
    lua_pop(L, 1);
    if (!s && !scalar) return 0;
    if (s && first && !lvs_localsum_compatible(first, s)) return 0;
    if (s && !first) first = s;
  }
  if (!first) return 0;
  lvs_ctx *ctx = lvs_localsum_ctx(first);
  lvs_matrix **out = lvsL_newmatrix(L);
  const lvs_localsum **terms = lua_newuserdatauv(L, (size_t)n * sizeof *terms, 0);
  double (*coef)[2] = lua_newuserdatauv(L, (size_t)n * sizeof *coef, 0);
  for (lua_Integer k = 1; k <= n; k++) { /* the values stay referenced by the list */
    lua_rawgeti(L, 1, k);
    coef[k - 1][0] = 1.0;
    coef[k - 1][1] = 0.0;
    terms[k - 1] = lvsL_toscalar(L, -1, coef[k - 1]) ? NULL : lvsL_testlocalsum(L, -1);
    lua_pop(L, 1);
  }
  lvs_localsum *r;
  lvsL_check(L, ctx, lvs_localsum_sum(ctx, (size_t)n, (const double (*)[2])coef, terms, &r), "sum");
  out[2] = (lvs_matrix *)(void *)r;
  lua_pop(L, 2);
  return 1;
}

/* ls._sum_terms(list): the sum of a sequence of ops and scalars (a scalar
 * means scalar times the identity) in one pass (lvs_matrix_sum, or
 * lvs_localsum_sum when every op is a site sum of one basis); ls.sum hands
 * it batches of its terms. */
static int l_sum_terms(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  luaL_checktype(L, 1, LUA_TTABLE);
  lua_Integer n = (lua_Integer)lua_rawlen(L, 1);
  luaL_argcheck(L, n > 0, 1, "needs at least one term");
  luaL_argcheck(L, (size_t)n <= ((size_t)-1) / (sizeof(lvs_matrix *) + 2 * sizeof(double)), 1,
                "too many terms");
  if (sum_site_terms(L, n)) return 1;
  /* scratch in userdata: nothing leaks when a check below raises */
  const lvs_matrix **terms = lua_newuserdatauv(L, (size_t)n * sizeof *terms, 0);
  double (*coef)[2] = lua_newuserdatauv(L, (size_t)n * sizeof *coef, 0);
  for (lua_Integer k = 1; k <= n; k++) {
    lua_rawgeti(L, 1, k);
    double z[2];
    if (lvsL_toscalar(L, -1, z)) {
      if (!isfinite(z[0]) || !isfinite(z[1])) {
        lua_pushfstring(L, "term %d is NaN or infinite", (int)k);
        return luaL_argerror(L, 1, lua_tostring(L, -1));
      }
      terms[k - 1] = NULL;
      coef[k - 1][0] = z[0];
      coef[k - 1][1] = z[1];
    } else {
      lvs_matrix **p = luaL_testudata(L, -1, LVS_MATRIX_MT);
      if (!p || (!p[0] && !p[2])) {
        lua_pushfstring(L, "term %d is %s", (int)k, p ? "a closed matrix" : "not a matrix or a number");
        return luaL_argerror(L, 1, lua_tostring(L, -1));
      }
      terms[k - 1] = lvsL_testmatrix(L, -1); /* a site sum is written out */
      coef[k - 1][0] = 1.0;
      coef[k - 1][1] = 0.0;
    }
    lua_pop(L, 1);
  }
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_sum(ctx, (size_t)n, (const double (*)[2])coef, terms, out), "sum");
  return 1;
}

/* ls._is_site_sum(x): true for an op still held as a site sum */
static int l_is_site_sum(lua_State *L) {
  lua_pushboolean(L, lvsL_testlocalsum(L, 1) != NULL);
  return 1;
}

static int c_tostring(lua_State *L) {
  double *z = luaL_checkudata(L, 1, LVS_COMPLEX_MT);
  if (z[1] == 0.0)
    lua_pushfstring(L, "%f", z[0]);
  else
    lua_pushfstring(L, "(%f%si%f)", z[0], z[1] < 0 ? "-" : "+", fabs(z[1]));
  return 1;
}

static int c_index(lua_State *L) {
  double *z = luaL_checkudata(L, 1, LVS_COMPLEX_MT);
  const char *k = luaL_checkstring(L, 2);
  if (strcmp(k, "re") == 0) lua_pushnumber(L, z[0]);
  else if (strcmp(k, "im") == 0) lua_pushnumber(L, z[1]);
  else if (strcmp(k, "abs") == 0) lua_pushnumber(L, hypot(z[0], z[1]));
  else lua_pushnil(L);
  return 1;
}

static int c_eq(lua_State *L) {
  double a[2], b[2];
  lua_pushboolean(L, lvsL_toscalar(L, 1, a) && lvsL_toscalar(L, 2, b) && a[0] == b[0] && a[1] == b[1]);
  return 1;
}

/* ls.complex(re, im) */
static int l_complex(lua_State *L) {
  lvsL_pushcomplex(L, luaL_checknumber(L, 1), luaL_optnumber(L, 2, 0.0));
  return 1;
}

void lvsL_open_matrix(lua_State *L, int ctxidx) {
  static const luaL_Reg meta[] = {{"__add", m_add}, {"__sub", m_sub}, {"__mul", m_mul},
                                  {"__div", m_div}, {"__unm", m_unm}, {"__pow", m_pow},
                                  {"__tostring", m_tostring}, {"__gc", l_gc},
                                  {"__close", l_close}, {NULL, NULL}};
  static const luaL_Reg methods[] = {
      {"get", m_get}, {"set", m_set}, {"dim", m_dim}, {"adj", m_adj}, {"copy", m_copy},
      {"is_hermitian", m_is_hermitian}, {"is_complex", m_is_complex}, {"storage", m_storage},
      {"trace", m_trace}, {"dot", m_dot}, {"close", l_close}, {NULL, NULL}};
  luaL_newmetatable(L, LVS_MATRIX_MT);
  lvsL_setfuncs(L, meta, ctxidx);
  lua_newtable(L);
  lvsL_setfuncs(L, methods, ctxidx);
  lua_pushvalue(L, -1);
  lua_setfield(L, -4, "_matrix_methods"); /* sugar adds Lua methods here */
  lua_setfield(L, -2, "__index");
  lua_pop(L, 1);

  static const luaL_Reg cmeta[] = {{"__add", m_add}, {"__sub", m_sub}, {"__mul", m_mul},
                                   {"__div", m_div}, {"__unm", m_unm}, {"__tostring", c_tostring},
                                   {"__index", c_index}, {"__eq", c_eq}, {NULL, NULL}};
  luaL_newmetatable(L, LVS_COMPLEX_MT);
  lvsL_setfuncs(L, cmeta, ctxidx);
  lua_pop(L, 1);

  static const luaL_Reg fns[] = {{"matrix", l_matrix}, {"zeros", l_zeros}, {"complex", l_complex},
                                 {"_sum_terms", l_sum_terms}, {"_is_site_sum", l_is_site_sum},
                                 {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
  lvsL_pushcomplex(L, 0.0, 1.0);
  lua_setfield(L, -2, "I");
}
