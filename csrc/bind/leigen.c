/* leigen.c -- ls.eigen(H [, {count = k, vectors = true, blocks = {...},
 * method = "auto" | "dense" | "krylov", near = E, tol =, maxiter =, ncv =,
 * stats = {}}])
 * -> E, U */
#include <math.h>
#include <stdint.h>
#include <string.h>
#include "bind/lbind.h"

/* blocks = {{i, j, ...}, ...}: symmetry sectors given by the user (1-based
 * states, each exactly once) as 0-based sector numbers in a GC-owned
 * userdata left on the stack; NULL without the option */
static size_t *opt_blocks(lua_State *L, size_t n) {
  size_t *comp = NULL;
  if (lua_istable(L, 2)) {
    lua_getfield(L, 2, "blocks");
    if (!lua_isnil(L, -1)) {
      int bt = lua_gettop(L);
      if (!lua_istable(L, bt)) luaL_argerror(L, 2, "option 'blocks' must be a table of index lists");
      comp = lua_newuserdatauv(L, n * sizeof(size_t), 0); /* GC-owned */
      for (size_t i = 0; i < n; i++) comp[i] = SIZE_MAX;
      size_t nb = lua_rawlen(L, bt);
      for (size_t b = 1; b <= nb; b++) {
        if (lua_rawgeti(L, bt, (lua_Integer)b) != LUA_TTABLE) {
          lua_pushfstring(L, "option 'blocks': block %d is not a table of states", (int)b);
          luaL_argerror(L, 2, lua_tostring(L, -1));
        }
        size_t len = lua_rawlen(L, -1);
        if (len == 0) {
          lua_pushfstring(L, "option 'blocks': block %d is empty", (int)b);
          luaL_argerror(L, 2, lua_tostring(L, -1));
        }
        for (size_t k = 1; k <= len; k++) {
          lua_rawgeti(L, -1, (lua_Integer)k);
          int ok;
          lua_Integer i = lua_tointegerx(L, -1, &ok);
          lua_pop(L, 1);
          if (!ok || i < 1 || (size_t)i > n) {
            lua_pushfstring(L, "option 'blocks': block %d has an entry that is not a state 1..%d", (int)b, (int)n);
            luaL_argerror(L, 2, lua_tostring(L, -1));
          }
          if (comp[i - 1] != SIZE_MAX) {
            lua_pushfstring(L, "option 'blocks': state %d is listed twice", (int)i);
            luaL_argerror(L, 2, lua_tostring(L, -1));
          }
          comp[i - 1] = b - 1;
        }
        lua_pop(L, 1);
      }
      for (size_t i = 0; i < n; i++)
        if (comp[i] == SIZE_MAX) {
          lua_pushfstring(L, "option 'blocks': state %d is in no block", (int)i + 1);
          luaL_argerror(L, 2, lua_tostring(L, -1));
        }
    }
  }
  return comp;
}

/* method, near, tol, maxiter, ncv and stats into eo (checked) */
static void opt_solver(lua_State *L, lvs_matrix *h, size_t n, lua_Integer count, lvs_eigen_opts *eo) {
  if (lua_istable(L, 2)) {
    static const char *const methods[] = {"auto", "dense", "krylov", NULL};
    lua_getfield(L, 2, "method");
    if (!lua_isnil(L, -1)) {
      const char *m = lua_type(L, -1) == LUA_TSTRING ? lua_tostring(L, -1) : NULL;
      int k = 0;
      while (m && methods[k] && strcmp(methods[k], m) != 0) k++;
      if (!m || !methods[k]) luaL_argerror(L, 2, "option 'method' must be \"auto\", \"dense\" or \"krylov\"");
      eo->method = k == 0 ? LVS_EIGEN_AUTO : k == 1 ? LVS_EIGEN_DENSE : LVS_EIGEN_KRYLOV;
    }
    lua_pop(L, 1);
    lua_getfield(L, 2, "near");
    if (!lua_isnil(L, -1)) {
      if (!lua_isnumber(L, -1) || !isfinite(lua_tonumber(L, -1)))
        luaL_argerror(L, 2, "option 'near' must be a finite number");
      eo->has_near = 1;
      eo->near = lua_tonumber(L, -1);
    }
    lua_pop(L, 1);
    eo->tol = lvsL_optfield_num(L, 2, "tol", 0.0, "eigen", 2);
    if (!(eo->tol >= 0.0 && eo->tol < 1.0)) luaL_argerror(L, 2, "option 'tol' must be from 0 (machine epsilon) to below 1");
    lua_Integer mi = lvsL_optfield_int(L, 2, "maxiter", 0, "eigen", 2);
    if (mi < 0 || mi > 2147483647) luaL_argerror(L, 2, "option 'maxiter' must be a positive integer");
    eo->maxiter = (size_t)mi;
    lua_Integer ncv = lvsL_optfield_int(L, 2, "ncv", 0, "eigen", 2);
    if (ncv < 0 || (ncv > 0 && ((size_t)ncv <= (size_t)count || (size_t)ncv > n))) {
      lua_pushfstring(L, "option 'ncv' must be from count + 1 = %d to %d, got %d", (int)count + 1, (int)n, (int)ncv);
      luaL_argerror(L, 2, lua_tostring(L, -1));
    }
    eo->ncv = (size_t)ncv;
    lua_getfield(L, 2, "stats");
    if (!lua_isnil(L, -1) && !lua_istable(L, -1))
      luaL_argerror(L, 2, "option 'stats' must be a table (filled with what the solve cost)");
    lua_pop(L, 1);
    if (eo->method == LVS_EIGEN_KRYLOV && !lvs_matrix_is_sparse(h))
      luaL_argerror(L, 2, "option 'method': 'krylov' needs a sparse matrix (this one is stored dense)");
  }
}

/* stats = {}: what the solve cost, by raw sets */
static void put_stats(lua_State *L, const lvs_eigen_stats *es) {
  if (lua_istable(L, 2)) { /* stats = {}: what the solve cost */
    lua_getfield(L, 2, "stats");
    if (lua_istable(L, -1)) { /* raw sets: no metamethod of the caller's table runs here */
      const char *const keys[] = {"krylov_sectors", "dense_sectors", "products", "restarts"};
      const size_t vals[] = {es->krylov_sectors, es->dense_sectors, es->products, es->restarts};
      for (int k = 0; k < 4; k++) {
        lua_pushstring(L, keys[k]);
        lua_pushinteger(L, (lua_Integer)vals[k]);
        lua_rawset(L, -3);
      }
    }
    lua_pop(L, 1);
  }
}

static int l_eigen(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *h = lvsL_checkmatrix(L, 1);
  static const char *const known[] = {"count", "vectors", "blocks", "method", "near",  "tol",
                                      "maxiter", "ncv",    "stats",  NULL};
  lvsL_checkoptions(L, 2, known, "eigen", 2);
  size_t n = lvs_matrix_rows(h);
  if (n != lvs_matrix_cols(h)) {
    lua_pushfstring(L, "matrix must be square, got %dx%d", (int)n, (int)lvs_matrix_cols(h));
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_Integer count = lvsL_optfield_int(L, 2, "count", (lua_Integer)n, "eigen", 2);
  if (count < 1 || (size_t)count > n) {
    lua_pushfstring(L, "count must be from 1 to %d, got %d", (int)n, (int)count);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  int vectors = 1;
  if (lua_istable(L, 2)) {
    lua_getfield(L, 2, "vectors");
    if (!lua_isnil(L, -1)) vectors = lua_toboolean(L, -1);
    lua_pop(L, 1);
  }
  size_t *comp = opt_blocks(L, n);
  lvs_eigen_opts eo = {0};
  lvs_eigen_stats es = {0};
  eo.stats = &es;
  opt_solver(L, h, n, count, &eo);
  /* a large op was just built: the temporaries of its expression (site
   * operators, partial sums, scaled copies) are garbage the collector has
   * not seen die yet; collect them before the solver's working memory is
   * taken, so it reuses theirs (chain jobs: peak 87 -> 79 MB at 2^16
   * states, 333 -> 294 MB at 2^18). The cost is one cycle over the Lua
   * heap. */
  if (lvs_matrix_is_sparse(h) && lvs_matrix_nnz(h) >= ((size_t)1 << 20)) lua_gc(L, LUA_GCCOLLECT);
  double *w = lua_newuserdatauv(L, (size_t)count * sizeof(double), 0); /* GC-owned */
  lvs_matrix **out = vectors ? lvsL_newmatrix(L) : NULL;
  int st = lvs_eigen_ex(h, comp, (size_t)count, vectors, &eo, w, out);
  if (st == LVS_EINVAL && comp && strstr(lvs_errmsg(ctx), "couples two blocks")) {
    lua_pushfstring(L, "option 'blocks': %s", lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  if (st == LVS_EINVAL && eo.has_near && strstr(lvs_errmsg(ctx), "near = ")) {
    lua_pushfstring(L, "option 'near': %s", lvs_errmsg(ctx) + (strncmp(lvs_errmsg(ctx), "eigen: ", 7) ? 0 : 7));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  if (st == LVS_ENOTHERM || (st == LVS_EINVAL && lvs_errcode(ctx) == LVS_EINVAL)) {
    lua_pushstring(L, lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lvsL_check(L, ctx, st, "eigen");
  put_stats(L, &es);
  lua_createtable(L, (int)count, 0);
  for (lua_Integer k = 0; k < count; k++) {
    lua_pushnumber(L, w[k]);
    lua_rawseti(L, -2, k + 1);
  }
  if (vectors) {
    lua_pushvalue(L, -2);
    return 2;
  }
  return 1;
}

void lvsL_open_eigen(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"eigen", l_eigen}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}
