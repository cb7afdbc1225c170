/* leffective.c -- effective Hamiltonians of a group of levels.
 *
 *   h = ls.effective(H0, V, {levels = {1, 2}, order = K})
 *   h = ls.effective(H0, V, {window = {lo, hi}, order = K})
 *   h = ls.effective(H0, V, {basis = B, labels = {{n = 0}, {n = 1}}, order = K})
 *   h:term(k) -> op (d x d);  h:at(lambda [, order]) -> op (rows, columns as h:labels())
 *   h:group() -> {1-based levels of the group};  h:labels() -> {strings};  h:dim();
 *   h:order();  h:warnings() -> {strings}
 *   tostring(h): every term as a matrix labelled by the group's unperturbed
 *   states (B:describe of the basis state when H0 is diagonal in the basis
 *   B given as option 'basis', else "level k")
 */
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "bind/lbind.h"

#define LVS_EFFECTIVE_MT "levelshift.effective"

static lvs_effective *checkeff(lua_State *L, int idx) {
  lvs_effective **p = luaL_checkudata(L, idx, LVS_EFFECTIVE_MT);
  if (!*p) luaL_argerror(L, idx, "attempt to use a freed effective Hamiltonian");
  return *p;
}

static int argfail(lua_State *L, lvs_ctx *ctx, int argn) {
  lua_pushstring(L, lvs_errmsg(ctx));
  lvs_clear_error(ctx);
  return luaL_argerror(L, argn, lua_tostring(L, -1));
}

/* the group by labels: B:find(labels[i]) (protected, so a miss names this
 * function), then the level of H0 that state is; lv GC-owned on the stack */
static size_t *group_by_labels(lua_State *L, lvs_ctx *ctx, lvs_matrix *h0, size_t n, int bidx, int labidx,
                               size_t *cnt) {
  lua_getfield(L, 3, "levels");
  lua_getfield(L, 3, "window");
  int other = !lua_isnil(L, -1) || !lua_isnil(L, -2);
  lua_pop(L, 2);
  if (other) luaL_argerror(L, 3, "give one of 'levels', 'window' or 'labels'");
  if (lua_isnil(L, bidx)) luaL_argerror(L, 3, "'labels' needs 'basis' = the basis H0 is written in");
  if (!lua_istable(L, labidx)) luaL_argerror(L, 3, "'labels' must be a list of state labels");
  lua_Integer len = (lua_Integer)lua_rawlen(L, labidx);
  if (len == 0) luaL_argerror(L, 3, "the group of levels is empty");
  if ((size_t)len > n) len = (lua_Integer)n + 1;
  size_t *lv = lua_newuserdatauv(L, (size_t)len * sizeof(size_t), 0);
  for (lua_Integer i = 1; i <= len; i++) {
    lua_getfield(L, bidx, "find");
    lua_pushvalue(L, bidx);
    lua_rawgeti(L, labidx, i);
    if (lua_pcall(L, 2, 1, 0) != LUA_OK || !lua_isinteger(L, -1)) {
      lua_pushfstring(L, "'labels'[%I] matches no state of the basis", i);
      luaL_argerror(L, 3, lua_tostring(L, -1));
    }
    size_t state = (size_t)lua_tointeger(L, -1) - 1, level;
    lua_pop(L, 1);
    if (lvs_level_of_state(h0, state, &level)) {
      lua_pushfstring(L, "'labels' needs H0 diagonal in 'basis': %s", lvs_errmsg(ctx));
      lvs_clear_error(ctx);
      luaL_argerror(L, 3, lua_tostring(L, -1));
    }
    lv[(*cnt)++] = level;
  }
  return lv;
}

/* the group as level numbers, the table at idx; lv GC-owned on the stack */
static size_t *group_by_levels(lua_State *L, int idx, size_t n, size_t *cnt) {
  if (!lua_istable(L, idx)) luaL_argerror(L, 3, "'levels' must be a list of level numbers");
  lua_Integer len = (lua_Integer)lua_rawlen(L, idx);
  if (len == 0) luaL_argerror(L, 3, "the group of levels is empty");
  if ((size_t)len > n) len = (lua_Integer)n + 1; /* a repeat or out-of-range entry must exist */
  size_t *lv = lua_newuserdatauv(L, (size_t)len * sizeof(size_t), 0);
  for (lua_Integer i = 1; i <= len; i++) {
    lua_rawgeti(L, idx, i);
    int isnum;
    lua_Integer x = lua_tointegerx(L, -1, &isnum);
    lua_pop(L, 1);
    if (!isnum) {
      lua_pushfstring(L, "'levels'[%I] must be an integer level number", i);
      luaL_argerror(L, 3, lua_tostring(L, -1));
    }
    if (x < 1 || (lua_Unsigned)x > n) {
      lua_pushfstring(L, "level %I is out of range 1..%d", x, (int)n);
      luaL_argerror(L, 3, lua_tostring(L, -1));
    }
    lv[(*cnt)++] = (size_t)(x - 1);
  }
  return lv;
}

/* the group as the levels of H0 inside {lo, hi}, the table at idx */
static size_t *group_by_window(lua_State *L, lvs_ctx *ctx, lvs_matrix *h0, size_t n, int idx, size_t *cnt) {
  if (!lua_istable(L, idx)) luaL_argerror(L, 3, "'window' must be {lo, hi}");
  lua_rawgeti(L, idx, 1);
  lua_rawgeti(L, idx, 2);
  if (!lua_isnumber(L, -2) || !lua_isnumber(L, -1)) luaL_argerror(L, 3, "'window' must be {lo, hi}");
  double lo = lua_tonumber(L, -2), hi = lua_tonumber(L, -1);
  lua_pop(L, 2);
  if (!(lo <= hi)) luaL_argerror(L, 3, "'window' = {lo, hi} needs lo <= hi");
  double *w = lua_newuserdatauv(L, (n ? n : 1) * sizeof(double), 0);
  int st = lvs_effective_spectrum(h0, w);
  if (st == LVS_ENOTHERM || st == LVS_EINVAL) {
    lua_pushfstring(L, "H0: %s", lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lvsL_check(L, ctx, st, "effective");
  size_t *lv = lua_newuserdatauv(L, (n ? n : 1) * sizeof(size_t), 0);
  for (size_t i = 0; i < n; i++)
    if (w[i] >= lo && w[i] <= hi) lv[(*cnt)++] = i;
  if (*cnt == 0) {
    lua_pushfstring(L, "the group of levels is empty: no level of H0 in the window [%f, %f]", lo, hi);
    luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  return lv;
}

/* 'basis' (labels of the printout, choice by labels): nil or a basis of n states */
static void check_basis(lua_State *L, int bidx, size_t n) {
  if (lua_isnil(L, bidx)) return;
  if (!luaL_testudata(L, bidx, LVS_BASIS_MT)) luaL_argerror(L, 3, "'basis' must be a basis");
  lvs_basis *B = lvsL_checkbasis(L, bidx);
  if (lvs_basis_dim(B) != n) {
    lua_pushfstring(L, "'basis' has %d states but H0 is %dx%d", (int)lvs_basis_dim(B), (int)n, (int)n);
    luaL_argerror(L, 3, lua_tostring(L, -1));
  }
}

static int l_effective(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *h0 = lvsL_checkmatrix(L, 1);
  lvs_matrix *v = lvsL_checkmatrix(L, 2);
  luaL_checktype(L, 3, LUA_TTABLE);
  static const char *const known[] = {"levels", "window", "labels", "basis", "order", NULL};
  lvsL_checkoptions(L, 3, known, "effective", 3);
  lua_Integer order = lvsL_optfield_int(L, 3, "order", 2, "effective", 3);
  if (order < 1 || order > 50) {
    lua_pushfstring(L, "order must be from 1 to 50, got %I", order);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0)) {
    lua_pushfstring(L, "H0 must be square, got %dx%d", (int)n, (int)lvs_matrix_cols(h0));
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_getfield(L, 3, "basis");
  int bidx = lua_gettop(L);
  check_basis(L, bidx, n);
  lua_getfield(L, 3, "labels");
  int labidx = lua_gettop(L);
  int haslab = !lua_isnil(L, labidx);
  size_t *lv = NULL, cnt = 0;
  if (haslab) lv = group_by_labels(L, ctx, h0, n, bidx, labidx, &cnt);
  lua_getfield(L, 3, "levels");
  lua_getfield(L, 3, "window");
  int top = lua_gettop(L), haslev = !lua_isnil(L, top - 1), haswin = !lua_isnil(L, top);
  if (!haslab && haslev == haswin)
    return luaL_argerror(L, 3, haslev ? "give either 'levels' or 'window', not both"
                                      : "give the group as 'levels' = {...}, 'window' = {lo, hi} or 'labels' = {...}");
  if (!haslab) lv = haslev ? group_by_levels(L, top - 1, n, &cnt) : group_by_window(L, ctx, h0, n, top, &cnt);
  lvs_effective **out = lua_newuserdatauv(L, sizeof *out, 1);
  *out = NULL;
  luaL_setmetatable(L, LVS_EFFECTIVE_MT);
  lua_pushvalue(L, bidx);
  lua_setiuservalue(L, -2, 1); /* the basis (or nil) */
  int st = lvs_effective_new(h0, v, lv, cnt, (int)order, out);
  if (st == LVS_ENOTHERM || st == LVS_EDIM) {
    int arg = strncmp(lvs_errmsg(ctx), "H0", 2) == 0 ? 1 : 2;
    return argfail(L, ctx, arg);
  }
  if (st == LVS_EINVAL || st == LVS_ERANGE) return argfail(L, ctx, 3);
  lvsL_check(L, ctx, st, "effective");
  return 1;
}

/* push {label of member 1, ...}: B:describe(state) when H0 was diagonal in
 * the basis given, else "level k" */
static void push_labels(lua_State *L, int eidx, lvs_effective *e) {
  size_t d = lvs_effective_dim(e);
  const size_t *lv = lvs_effective_levels(e);
  eidx = lua_absindex(L, eidx);
  lua_getiuservalue(L, eidx, 1);
  int hasb = !lua_isnil(L, -1);
  int bidx = lua_gettop(L);
  lua_createtable(L, (int)d, 0);
  for (size_t i = 0; i < d; i++) {
    size_t st = lvs_effective_state(e, i);
    int done = 0;
    if (hasb && st != (size_t)-1) {
      lua_getfield(L, bidx, "describe");
      lua_pushvalue(L, bidx);
      lua_pushinteger(L, (lua_Integer)st + 1);
      if (lua_pcall(L, 2, 1, 0) == LUA_OK && lua_type(L, -1) == LUA_TSTRING)
        done = 1;
      else
        lua_pop(L, 1);
    }
    if (!done) lua_pushfstring(L, "level %d", (int)lv[i] + 1);
    lua_rawseti(L, -2, (lua_Integer)i + 1);
  }
  lua_remove(L, bidx);
}

static int e_labels(lua_State *L) {
  push_labels(L, 1, checkeff(L, 1));
  return 1;
}

static int e_term(lua_State *L) {
  lvs_effective *e = checkeff(L, 1);
  lua_Integer k = luaL_checkinteger(L, 2);
  if (k < 0 || k > lvs_effective_order(e)) {
    lua_pushfstring(L, "order %I is out of range 0..%d", k, lvs_effective_order(e));
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, lvsL_ctx(L), lvs_effective_term(e, (int)k, out), "term");
  return 1;
}

static int e_at(lua_State *L) {
  lvs_effective *e = checkeff(L, 1);
  double lam = luaL_checknumber(L, 2);
  if (!isfinite(lam)) return luaL_argerror(L, 2, "lambda must be finite");
  lua_Integer k = luaL_optinteger(L, 3, lvs_effective_order(e));
  if (k < 0 || k > lvs_effective_order(e)) {
    lua_pushfstring(L, "order %I is out of range 0..%d", k, lvs_effective_order(e));
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, lvsL_ctx(L), lvs_effective_at(e, lam, (int)k, out), "at");
  /* the gap rule at this lambda: a second result, nil when it holds */
  double gap, coup;
  lvs_effective_gap(e, &gap, &coup);
  if (fabs(lam) * coup > 0.25 * gap) {
    lua_pushfstring(L, "at lambda = %f the coupling |lambda| max|V_am| = %f is not small against the gap %f between "
                    "the group and the other levels (ratio %f): the series may not converge here; compare with ls.eigen",
                    lam, fabs(lam) * coup, gap, fabs(lam) * coup / gap);
    return 2;
  }
  lua_pushnil(L);
  return 2;
}

static int e_levels(lua_State *L) {
  lvs_effective *e = checkeff(L, 1);
  size_t d = lvs_effective_dim(e);
  const size_t *lv = lvs_effective_levels(e);
  lua_createtable(L, (int)d, 0);
  for (size_t i = 0; i < d; i++) {
    lua_pushinteger(L, (lua_Integer)lv[i] + 1);
    lua_rawseti(L, -2, (lua_Integer)i + 1);
  }
  return 1;
}

static int e_dim(lua_State *L) {
  lua_pushinteger(L, (lua_Integer)lvs_effective_dim(checkeff(L, 1)));
  return 1;
}

static int e_order(lua_State *L) {
  lua_pushinteger(L, lvs_effective_order(checkeff(L, 1)));
  return 1;
}

static int e_warnings(lua_State *L) {
  const char *w = lvs_effective_warnings(checkeff(L, 1));
  lua_newtable(L);
  int k = 0;
  while (*w) {
    const char *nl = strchr(w, '\n');
    size_t len = nl ? (size_t)(nl - w) : strlen(w);
    lua_pushlstring(L, w, len);
    lua_rawseti(L, -2, ++k);
    w += len;
    if (*w == '\n') w++;
  }
  return 1;
}

static int e_gc(lua_State *L) {
  lvs_effective **p = luaL_checkudata(L, 1, LVS_EFFECTIVE_MT);
  lvsL_gc_guard(L, "effective Hamiltonian");
  lvs_effective_free(*p);
  *p = NULL;
  return 0;
}

static void addnum(luaL_Buffer *b, double re, double im, int cplx) {
  char buf[64];
  if (fabs(re) < 5e-15) re = 0.0;
  if (fabs(im) < 5e-15) im = 0.0;
  if (cplx) snprintf(buf, sizeof buf, " %12.6g%+.6gi", re, im);
  else snprintf(buf, sizeof buf, " %12.6g", re);
  luaL_addstring(b, buf);
}

static int e_tostring(lua_State *L) {
  lvs_effective **p = luaL_checkudata(L, 1, LVS_EFFECTIVE_MT);
  if (!*p) {
    lua_pushstring(L, "levelshift.effective (freed)");
    return 1;
  }
  lvs_effective *e = *p;
  lvs_ctx *ctx = lvsL_ctx(L);
  size_t d = lvs_effective_dim(e);
  const size_t *lv = lvs_effective_levels(e);
  int K = lvs_effective_order(e);
  push_labels(L, 1, e);
  int labs = lua_gettop(L);
  /* label column width: the longest label, at most 24 characters */
  size_t w = 5;
  for (size_t i = 0; i < d; i++) {
    lua_rawgeti(L, labs, (lua_Integer)i + 1);
    size_t len = lua_rawlen(L, -1);
    if (len > w) w = len;
    lua_pop(L, 1);
  }
  if (w > 24) w = 24;
  luaL_Buffer b;
  luaL_buffinit(L, &b);
  char buf[128];
  snprintf(buf, sizeof buf, "levelshift.effective: %zu level%s, order %d, canonical Van Vleck\n levels:", d,
           d == 1 ? "" : "s", K);
  luaL_addstring(&b, buf);
  for (size_t i = 0; i < d; i++) {
    snprintf(buf, sizeof buf, " %zu", lv[i] + 1);
    luaL_addstring(&b, buf);
  }
  for (int k = 0; k <= K; k++) {
    lvs_matrix *t = NULL;
    int st = lvs_effective_term(e, k, &t);
    if (st) {
      lvs_clear_error(ctx);
      break;
    }
    int cplx = lvs_matrix_is_complex(t);
    int cw = cplx ? 26 : 13; /* width of one number as addnum writes it */
    snprintf(buf, sizeof buf, "\n order %d (coefficient of lambda^%d):\n  %*s", k, k, (int)w, "");
    luaL_addstring(&b, buf);
    for (size_t j = 0; j < d && j < 16; j++) { /* column heads: the labels, cut to the column width */
      lua_rawgeti(L, labs, (lua_Integer)j + 1);
      snprintf(buf, sizeof buf, " %*.*s", cw - 1, cw - 1, lua_tostring(L, -1));
      lua_pop(L, 1);
      luaL_addstring(&b, buf);
    }
    for (size_t i = 0; i < d && i < 16; i++) {
      lua_rawgeti(L, labs, (lua_Integer)i + 1);
      snprintf(buf, sizeof buf, "\n  %-*.*s", (int)w, (int)w, lua_tostring(L, -1));
      lua_pop(L, 1);
      luaL_addstring(&b, buf);
      for (size_t j = 0; j < d && j < 16; j++) {
        double re, im;
        lvs_matrix_get(t, i, j, &re, &im);
        addnum(&b, re, im, cplx);
      }
      if (d > 16) luaL_addstring(&b, " ...");
    }
    if (d > 16) luaL_addstring(&b, "\n  ...");
    lvs_matrix_free(t);
  }
  const char *wn = lvs_effective_warnings(e);
  while (*wn) {
    const char *nl = strchr(wn, '\n');
    size_t len = nl ? (size_t)(nl - wn) : strlen(wn);
    luaL_addstring(&b, "\n warning: ");
    luaL_addlstring(&b, wn, len);
    wn += len;
    if (*wn == '\n') wn++;
  }
  luaL_pushresult(&b);
  return 1;
}

void lvsL_open_effective(lua_State *L, int ctxidx) {
  luaL_newmetatable(L, LVS_EFFECTIVE_MT);
  static const luaL_Reg mt[] = {{"__gc", e_gc}, {"__tostring", e_tostring}, {NULL, NULL}};
  lvsL_setfuncs(L, mt, ctxidx);
  lua_newtable(L);
  static const luaL_Reg m[] = {{"term", e_term},   {"at", e_at},         {"group", e_levels}, {"dim", e_dim},
                               {"order", e_order}, {"warnings", e_warnings}, {"labels", e_labels}, {NULL, NULL}};
  lvsL_setfuncs(L, m, ctxidx);
  lua_setfield(L, -2, "__index");
  lua_pop(L, 1);
  static const luaL_Reg fns[] = {{"effective", l_effective}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}
