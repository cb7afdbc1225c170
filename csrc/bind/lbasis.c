/* lbasis.c -- binding of bases: ls.basis, ls.oscillator, ls.spin,
 * ls.product, their operators (B.x, B.Sz, P:site(i).Sz) and builders
 * (B:diag(f), B:matrix(f), B:identity(), B:state(labels)). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include "bind/lbind.h"

typedef struct {
  lvs_basis *b;
  lvs_basis *pending; /* closed while a binding was running below; freed by __gc */
} basis_ud;

typedef struct {
  const lvs_basis *b; /* borrowed from the pinned basis userdata */
  size_t site;        /* 1-based */
} site_ud;

static basis_ud *checkbud(lua_State *L, int idx) {
  basis_ud *u = luaL_checkudata(L, idx, LVS_BASIS_MT);
  if (!u->b) luaL_argerror(L, idx, "attempt to use a closed basis");
  return u;
}

lvs_basis *lvsL_checkbasis(lua_State *L, int idx) { return checkbud(L, idx)->b; }

static basis_ud *newbasis(lua_State *L);
/* an empty levelshift.basis userdata on the stack; the caller fills *p */
lvs_basis **lvsL_newbasis(lua_State *L) { return &newbasis(L)->b; }

static basis_ud *newbasis(lua_State *L) {
  basis_ud *u = lua_newuserdatauv(L, sizeof *u, 1);
  u->b = u->pending = NULL;
  luaL_setmetatable(L, LVS_BASIS_MT);
  return u;
}

static int b_close(lua_State *L);
static int b_gc(lua_State *L) {
  basis_ud *u = luaL_checkudata(L, 1, LVS_BASIS_MT);
  if (lvsL_gc_by_hand(L)) return b_close(L); /* a script's call: maybe in use */
  lvs_basis_free(u->b);
  lvs_basis_free(u->pending);
  u->b = u->pending = NULL;
  return 0;
}

/* close()/__close: a binding running below (a callback closing the basis it
 * was given) may still hold the basis, so then only __gc frees it */
static int b_close(lua_State *L) {
  basis_ud *u = luaL_checkudata(L, 1, LVS_BASIS_MT);
  if (u->b && lvsL_inside_binding(L)) u->pending = u->b;
  else lvs_basis_free(u->b);
  u->b = NULL;
  return 0;
}

/* ls.basis(n) or ls.basis{"name1", "name2", ...} */
static int l_basis(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lua_Integer n;
  int named = lua_type(L, 1) == LUA_TTABLE;
  if (named) {
    n = luaL_len(L, 1);
    luaL_argcheck(L, n > 0, 1, "basis needs at least one state name");
    for (lua_Integer i = 1; i <= n; i++) {
      if (lua_geti(L, 1, i) != LUA_TSTRING) {
        lua_pushfstring(L, "state name %d is not a string", (int)i);
        return luaL_argerror(L, 1, lua_tostring(L, -1));
      }
      lua_pop(L, 1);
    }
  } else {
    int ok;
    n = lua_tointegerx(L, 1, &ok);
    if (!ok) return luaL_typeerror(L, 1, "positive integer or table of state names");
    luaL_argcheck(L, n > 0, 1, "basis size must be positive");
    luaL_argcheck(L, n <= ((lua_Integer)1 << 40), 1, "basis size is absurdly large");
  }
  basis_ud *u = newbasis(L);
  lvsL_check(L, ctx, lvs_basis_plain(ctx, (size_t)n, &u->b), "basis");
  if (named) {
    lua_pushvalue(L, 1);
    lua_setiuservalue(L, -2, 1);
  }
  return 1;
}

static int l_oscillator(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int ok;
  lua_Integer n = lua_tointegerx(L, 1, &ok);
  if (!ok) return luaL_typeerror(L, 1, "positive integer");
  luaL_argcheck(L, n > 0, 1, "oscillator basis size must be positive");
  luaL_argcheck(L, n <= ((lua_Integer)1 << 40), 1, "oscillator basis size is absurdly large");
  static const char *const known[] = {"pad", NULL};
  lvsL_checkoptions(L, 2, known, "oscillator", 2);
  lua_Integer pad = lvsL_optfield_int(L, 2, "pad", LVS_DEFAULT_PAD, "oscillator", 2);
  /* pad 0 would make products silently wrong at the edge (nothing to pad into) */
  luaL_argcheck(L, pad >= 1 && pad <= 100000, 2,
                "pad must be between 1 and 100000 (products need padded levels to stay exact at the edge)");
  basis_ud *u = newbasis(L);
  lvsL_check(L, ctx, lvs_basis_oscillator(ctx, (size_t)n, (size_t)pad, &u->b), "oscillator");
  return 1;
}

static int l_spin(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  if (lua_type(L, 1) != LUA_TNUMBER) return luaL_typeerror(L, 1, "number (S = 1/2, 1, 3/2, ...)");
  double S = lua_tonumber(L, 1);
  double two = 2.0 * S;
  if (!(two >= 1.0) || two != floor(two) || two > 100000) {
    lua_pushfstring(L, "S must be a positive multiple of 1/2 (1/2, 1, 3/2, ...), got %f", S);
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  basis_ud *u = newbasis(L);
  lvsL_check(L, ctx, lvs_basis_spin(ctx, (int)two, &u->b), "spin");
  return 1;
}

/* ls.product(A, B, ...) or ls.product(A, count) */
static int l_product(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int top = lua_gettop(L);
  int count;
  luaL_checkudata(L, 1, LVS_BASIS_MT);
  int repeat = top == 2 && lua_type(L, 2) == LUA_TNUMBER;
  if (repeat) {
    int ok;
    lua_Integer k = lua_tointegerx(L, 2, &ok);
    luaL_argcheck(L, ok && k >= 1 && k <= 64, 2, "count must be an integer from 1 to 64");
    count = (int)k;
  } else {
    count = top;
    luaL_argcheck(L, count <= 64, 65, "at most 64 factors");
  }
  const lvs_basis *sites[64];
  for (int i = 0; i < count; i++) sites[i] = repeat ? lvsL_checkbasis(L, 1) : lvsL_checkbasis(L, i + 1);
  basis_ud *u = newbasis(L);
  lvsL_check(L, ctx, lvs_basis_product(ctx, sites, (size_t)count, &u->b), "product");
  return 1;
}

static int b_dim(lua_State *L) {
  lua_pushinteger(L, (lua_Integer)lvs_basis_dim(lvsL_checkbasis(L, 1)));
  return 1;
}

static int b_sites(lua_State *L) {
  lua_pushinteger(L, (lua_Integer)lvs_basis_sites(lvsL_checkbasis(L, 1)));
  return 1;
}

static int b_kind(lua_State *L) {
  static const char *names[] = {"plain", "oscillator", "spin", "product", "custom", "box", "rotor", "charge"};
  lua_pushstring(L, names[lvs_basis_kind_of(lvsL_checkbasis(L, 1))]);
  return 1;
}

/* push the state table of state s (0-based): {index=, <label>=..., [k]=...} */
static void push_state(lua_State *L, int budx, const lvs_basis *b, size_t s) {
  size_t nl = lvs_basis_nlabels(b);
  lua_createtable(L, (int)nl, (int)nl + 2);
  lua_pushinteger(L, (lua_Integer)s + 1);
  lua_setfield(L, -2, "index");
  for (size_t k = 0; k < nl; k++) {
    double v = lvs_basis_label(b, s, k);
    if (v == floor(v)) lua_pushinteger(L, (lua_Integer)v); else lua_pushnumber(L, v);
    lua_pushvalue(L, -1);
    lua_rawseti(L, -3, (lua_Integer)k + 1);
    lua_setfield(L, -2, lvs_basis_label_name(b, k));
  }
  if (lua_getiuservalue(L, budx, 1) == LUA_TTABLE) {
    lua_geti(L, -1, (lua_Integer)s + 1);
    lua_setfield(L, -3, "name");
  }
  lua_pop(L, 1);
}

static int b_labels(lua_State *L) {
  lvs_basis *b = lvsL_checkbasis(L, 1);
  int ok;
  lua_Integer i = lua_tointegerx(L, 2, &ok);
  luaL_argcheck(L, ok && i >= 1 && (size_t)i <= lvs_basis_dim(b), 2, "state index out of range");
  push_state(L, 1, b, (size_t)i - 1);
  return 1;
}

static int b_label_names(lua_State *L) {
  lvs_basis *b = lvsL_checkbasis(L, 1);
  size_t nl = lvs_basis_nlabels(b);
  lua_createtable(L, (int)nl, 0);
  for (size_t k = 0; k < nl; k++) {
    lua_pushstring(L, lvs_basis_label_name(b, k));
    lua_rawseti(L, -2, (lua_Integer)k + 1);
  }
  return 1;
}

/* growable triplet buffers kept as userdata (safe across Lua errors) */
typedef struct {
  size_t n, cap;
  size_t *i, *j;
  double *re, *im;
} trip;

static void trip_grow(lua_State *L, trip *t, int slot) {
  size_t cap = t->cap ? 2 * t->cap : 64;
  char *blk = lua_newuserdatauv(L, cap * (2 * sizeof(size_t) + 2 * sizeof(double)), 0);
  size_t *ni = (size_t *)blk, *nj = ni + cap;
  double *nre = (double *)(nj + cap), *nim = nre + cap;
  if (t->n) {
    memcpy(ni, t->i, t->n * sizeof(size_t));
    memcpy(nj, t->j, t->n * sizeof(size_t));
    memcpy(nre, t->re, t->n * sizeof(double));
    memcpy(nim, t->im, t->n * sizeof(double));
  }
  lua_replace(L, slot);
  t->i = ni; t->j = nj; t->re = nre; t->im = nim; t->cap = cap;
}

static void trip_add(lua_State *L, trip *t, int slot, size_t i, size_t j, const double z[2]) {
  if (t->n == t->cap) trip_grow(L, t, slot);
  t->i[t->n] = i; t->j[t->n] = j; t->re[t->n] = z[0]; t->im[t->n] = z[1];
  t->n++;
}

static void value_of(lua_State *L, int idx, double z[2], const char *fname, size_t i, size_t j) {
  if (lua_isnil(L, idx)) {
    z[0] = z[1] = 0.0;
    return;
  }
  if (!lvsL_toscalar(L, idx, z))
    luaL_error(L, "%s: the function returned a %s for state (%d, %d); expected a number", fname,
               luaL_typename(L, idx), (int)i + 1, (int)j + 1);
  if (!isfinite(z[0]) || !isfinite(z[1]))
    luaL_error(L, "%s: the function returned NaN or inf for state (%d, %d)", fname, (int)i + 1, (int)j + 1);
}

static void finish_op(lua_State *L, lvs_ctx *ctx, lvs_basis *b, trip *t, const char *fname) {
  lvs_matrix *plain = NULL;
  size_t n = lvs_basis_dim(b);
  int st = lvs_matrix_from_triplets(ctx, n, n, t->n, t->i, t->j, t->re, t->im, &plain);
  lvsL_check(L, ctx, st, fname);
  lvs_matrix **out = lvsL_newmatrix(L);
  st = lvs_basis_embed(b, plain, out);
  lvs_matrix_free(plain);
  lvsL_check(L, ctx, st, fname);
}

/* B:diag(f): f(state) -> number */
static int b_diag(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  luaL_checktype(L, 2, LUA_TFUNCTION);
  size_t n = lvs_basis_dim(b);
  trip t = {0};
  lua_settop(L, 2);
  lua_pushnil(L); /* slot 3: buffer */
  for (size_t s = 0; s < n; s++) {
    lua_pushvalue(L, 2);
    push_state(L, 1, b, s);
    lua_call(L, 1, 1);
    double z[2];
    value_of(L, -1, z, "diag", s, s);
    lua_pop(L, 1);
    if (z[0] != 0.0 || z[1] != 0.0) trip_add(L, &t, 3, s, s, z);
  }
  finish_op(L, ctx, b, &t, "diag");
  return 1;
}

/* B:sparse(f): f(col_state) -> {[row] = value, ...} (rows 1-based; nil or
 * an empty table: an empty column). One call per state, not per pair: the
 * way to build a large op by index. */
static int b_sparse(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  luaL_checktype(L, 2, LUA_TFUNCTION);
  size_t n = lvs_basis_dim(b);
  lua_settop(L, 2);
  lua_pushnil(L); /* 3: buffer */
  trip t = {0};
  for (size_t j = 0; j < n; j++) {
    lua_pushvalue(L, 2);
    push_state(L, 1, b, j);
    lua_call(L, 1, 1);
    if (lua_isnil(L, -1)) {
      lua_pop(L, 1);
      continue;
    }
    if (!lua_istable(L, -1))
      return luaL_error(L, "sparse: the function returned a %s for column %d; expected a table {[row] = value}",
                        luaL_typename(L, -1), (int)j + 1);
    for (lua_pushnil(L); lua_next(L, -2);) {
      int ok;
      lua_Integer i = lua_tointegerx(L, -2, &ok);
      if (lua_type(L, -2) != LUA_TNUMBER || !ok || i < 1 || (size_t)i > n)
        return luaL_error(L, "sparse: column %d has a key that is not a row from 1 to %d", (int)j + 1, (int)n);
      double z[2];
      value_of(L, -1, z, "sparse", (size_t)i - 1, j);
      if (z[0] != 0.0 || z[1] != 0.0) trip_add(L, &t, 3, (size_t)i - 1, j, z);
      lua_pop(L, 1);
    }
    lua_pop(L, 1);
  }
  finish_op(L, ctx, b, &t, "sparse");
  return 1;
}

/* B:matrix(f): f(row_state, col_state) -> number or complex (nil = 0) */
static int b_matrix(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  luaL_checktype(L, 2, LUA_TFUNCTION);
  size_t n = lvs_basis_dim(b);
  luaL_argcheck(L, n <= 20000, 1, "matrix(f) calls f for every pair; basis above 20000 states (use diag or operators)");
  lua_settop(L, 2);
  lua_pushnil(L); /* 3: buffer */
  lua_createtable(L, (int)n, 0); /* 4: state tables */
  for (size_t s = 0; s < n; s++) {
    push_state(L, 1, b, s);
    lua_rawseti(L, 4, (lua_Integer)s + 1);
  }
  trip t = {0};
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      lua_pushvalue(L, 2);
      lua_rawgeti(L, 4, (lua_Integer)i + 1);
      lua_rawgeti(L, 4, (lua_Integer)j + 1);
      lua_call(L, 2, 1);
      double z[2];
      value_of(L, -1, z, "matrix", i, j);
      lua_pop(L, 1);
      if (z[0] != 0.0 || z[1] != 0.0) trip_add(L, &t, 3, i, j, z);
    }
  finish_op(L, ctx, b, &t, "matrix");
  return 1;
}

static int b_identity(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_basis_op(b, 0, "identity", out), "identity");
  return 1;
}

/* index (0-based) of the state matching labels at idx, or raise */
static size_t find_state(lua_State *L, int budx, lvs_basis *b, int idx, const char *fname) {
  size_t n = lvs_basis_dim(b), nl = lvs_basis_nlabels(b);
  int argn = idx - 1;
  if (lua_type(L, idx) == LUA_TSTRING) {
    if (lua_getiuservalue(L, budx, 1) == LUA_TTABLE) {
      for (size_t s = 0; s < n; s++) {
        lua_geti(L, -1, (lua_Integer)s + 1);
        int eq = lua_rawequal(L, -1, idx);
        lua_pop(L, 1);
        if (eq) {
          lua_pop(L, 1);
          return s;
        }
      }
    }
    lua_pushfstring(L, "no state named '%s'", lua_tostring(L, idx));
    luaL_argerror(L, argn, lua_tostring(L, -1));
  }
  double want[64];
  if (nl > 64) luaL_error(L, "%s: too many labels", fname);
  if (lua_type(L, idx) == LUA_TNUMBER && nl == 1) {
    want[0] = lua_tonumber(L, idx);
  } else if (lua_type(L, idx) == LUA_TTABLE) {
    for (size_t k = 0; k < nl; k++) {
      if (lua_getfield(L, idx, lvs_basis_label_name(b, k)) == LUA_TNIL) {
        lua_pop(L, 1);
        lua_geti(L, idx, (lua_Integer)k + 1);
      }
      if (lua_type(L, -1) != LUA_TNUMBER) {
        lua_pushfstring(L, "label '%s' missing or not a number", lvs_basis_label_name(b, k));
        luaL_argerror(L, argn, lua_tostring(L, -1));
      }
      want[k] = lua_tonumber(L, -1);
      lua_pop(L, 1);
    }
  } else {
    luaL_typeerror(L, argn, "table of labels");
  }
  size_t s;
  if (lvs_basis_find(b, want, &s)) return s;
  luaL_argerror(L, argn, "no state of the basis has these labels");
  return 0;
}

static int b_find(lua_State *L) {
  lvs_basis *b = lvsL_checkbasis(L, 1);
  lua_pushinteger(L, (lua_Integer)find_state(L, 1, b, 2, "find") + 1);
  return 1;
}

/* B:state(labels) -> column vector (n x 1) */
static int b_state(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  size_t s = find_state(L, 1, b, 2, "state");
  lvs_matrix **out = lvsL_newmatrix(L);
  size_t zero = 0;
  double one = 1.0;
  lvsL_check(L, ctx, lvs_matrix_from_triplets(ctx, lvs_basis_dim(b), 1, 1, &s, &zero, &one, NULL, out),
             "state");
  return 1;
}

/* the op of a site; on a large product basis without padding it stays a
 * site sum (localsum.c) until something needs its entries */
static int push_op(lua_State *L, lvs_basis *b, size_t site, const char *name) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix **out = lvsL_newmatrix(L);
  if (site > 0 && lvs_localsum_pays(b)) {
    lvs_localsum *s;
    lvsL_check(L, ctx, lvs_localsum_site(b, site, name, &s), name);
    out[2] = (lvs_matrix *)(void *)s;
    return 1;
  }
  lvsL_check(L, ctx, lvs_basis_op(b, site, name, out), name);
  return 1;
}

/* P:place(i, M): the user's matrix M (the site's size) on site i of a
 * product, identity elsewhere; a site sum on a large unpadded product */
static int b_place(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  int ok;
  lua_Integer i = lua_tointegerx(L, 2, &ok);
  size_t ns = lvs_basis_kind_of(b) == LVS_BASIS_PRODUCT ? lvs_basis_sites(b) : 0;
  if (!ns) return luaL_argerror(L, 1, "place needs a product basis (ls.product)");
  if (!ok || i < 1 || (size_t)i > ns) {
    lua_pushfstring(L, "site index must be an integer from 1 to %d", (int)ns);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  lvs_matrix *m = lvsL_checkmatrix(L, 3);
  lvs_matrix **out = lvsL_newmatrix(L);
  if (lvs_localsum_pays(b)) {
    lvs_localsum *s;
    lvsL_check(L, ctx, lvs_localsum_place(b, (size_t)i, m, &s), "place");
    out[2] = (lvs_matrix *)(void *)s;
    return 1;
  }
  lvsL_check(L, ctx, lvs_basis_place(b, (size_t)i, m, out), "place");
  return 1;
}

/* ls._site_sum(P, i, name): the op of site i as a site sum whatever the
 * basis size (for the specs: the same op both ways) */
static int l_site_sum(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  lua_Integer i = luaL_checkinteger(L, 2);
  const char *name = luaL_checkstring(L, 3);
  luaL_argcheck(L, i >= 1, 2, "site index must be positive");
  lvs_matrix **out = lvsL_newmatrix(L);
  lvs_localsum *s;
  lvsL_check(L, ctx, lvs_localsum_site(b, (size_t)i, name, &s), "_site_sum");
  out[2] = (lvs_matrix *)(void *)s;
  return 1;
}

static int b_site(lua_State *L) {
  lvs_basis *b = lvsL_checkbasis(L, 1);
  int ok;
  lua_Integer i = lua_tointegerx(L, 2, &ok);
  size_t ns = lvs_basis_kind_of(b) == LVS_BASIS_PRODUCT ? lvs_basis_sites(b) : 1;
  if (!ok || i < 1 || (size_t)i > ns) {
    lua_pushfstring(L, "site index must be an integer from 1 to %d", (int)ns);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  site_ud *u = lua_newuserdatauv(L, sizeof *u, 1);
  u->b = b;
  u->site = (size_t)i;
  luaL_setmetatable(L, LVS_SITE_MT);
  lua_pushvalue(L, 1);
  lua_setiuservalue(L, -2, 1); /* pin the basis */
  return 1;
}

static int b_tostring(lua_State *L) {
  basis_ud *u = luaL_checkudata(L, 1, LVS_BASIS_MT);
  if (!u->b) {
    lua_pushstring(L, "levelshift.basis (closed)");
    return 1;
  }
  b_kind(L);
  lua_pushfstring(L, "levelshift.basis %s, %d states", lua_tostring(L, -1), (int)lvs_basis_dim(u->b));
  return 1;
}

static int b_index(lua_State *L) {
  luaL_checkudata(L, 1, LVS_BASIS_MT);
  /* methods first: they check for a closed basis themselves, and close()
   * must stay reachable so that closing twice is harmless */
  lua_pushvalue(L, 2);
  if (lua_rawget(L, lua_upvalueindex(2)) != LUA_TNIL) return 1;
  lua_pop(L, 1);
  lvs_basis *b = lvsL_checkbasis(L, 1);
  const char *k = lua_tostring(L, 2);
  if (!k) return 0;
  if (lvs_basis_kind_of(b) == LVS_BASIS_PRODUCT)
    return luaL_error(L, "a product basis has no operator '%s' of its own; use P:site(i).%s", k, k);
  return push_op(L, b, 0, k);
}

static int s_index(lua_State *L) {
  site_ud *u = luaL_checkudata(L, 1, LVS_SITE_MT);
  lua_getiuservalue(L, 1, 1);
  lvs_basis *b = lvsL_checkbasis(L, -1);
  (void)u;
  const char *k = luaL_checkstring(L, 2);
  return push_op(L, b, u->site, k);
}

void lvsL_open_basis(lua_State *L, int ctxidx) {
  static const luaL_Reg methods[] = {
      {"dim", b_dim}, {"sites", b_sites}, {"kind", b_kind}, {"labels", b_labels},
      {"label_names", b_label_names}, {"diag", b_diag}, {"matrix", b_matrix}, {"sparse", b_sparse},
      {"identity", b_identity}, {"state", b_state}, {"find", b_find}, {"site", b_site}, {"place", b_place},
      {"close", b_close}, {NULL, NULL}};
  luaL_newmetatable(L, LVS_BASIS_MT);
  lua_pushcfunction(L, b_gc);
  lua_setfield(L, -2, "__gc");
  lua_pushcfunction(L, b_close);
  lua_setfield(L, -2, "__close");
  lua_pushcfunction(L, b_tostring);
  lua_setfield(L, -2, "__tostring");
  lua_newtable(L); /* methods */
  lvsL_setfuncs(L, methods, ctxidx);
  lua_pushvalue(L, -1);
  lua_setfield(L, -4, "_basis_methods"); /* module table: sugar adds methods here */
  lua_pushvalue(L, ctxidx);
  lua_insert(L, -2);
  lua_pushcclosure(L, b_index, 2);
  lua_setfield(L, -2, "__index");
  lua_pop(L, 1);

  luaL_newmetatable(L, LVS_SITE_MT);
  lua_pushvalue(L, ctxidx);
  lua_pushcclosure(L, s_index, 1);
  lua_setfield(L, -2, "__index");
  lua_pop(L, 1);

  static const luaL_Reg fns[] = {{"basis", l_basis}, {"oscillator", l_oscillator}, {"spin", l_spin},
                                 {"product", l_product}, {"_site_sum", l_site_sum}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}
