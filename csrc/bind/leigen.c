/* leigen.c -- ls.eigen(H [, {count = k, vectors = true}]) -> E, U */
#include <stdint.h>
#include <string.h>
#include "bind/lbind.h"

static int l_eigen(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *h = lvsL_checkmatrix(L, 1);
  static const char *const known[] = {"count", "vectors", "blocks", NULL};
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
  /* blocks = {{i, j, ...}, ...}: symmetry sectors given by the user (1-based
   * states, each exactly once) */
  size_t *comp = NULL;
  if (lua_istable(L, 2)) {
    lua_getfield(L, 2, "blocks");
    if (!lua_isnil(L, -1)) {
      int bt = lua_gettop(L);
      if (!lua_istable(L, bt)) return luaL_argerror(L, 2, "option 'blocks' must be a table of index lists");
      comp = lua_newuserdatauv(L, n * sizeof(size_t), 0); /* GC-owned */
      for (size_t i = 0; i < n; i++) comp[i] = SIZE_MAX;
      size_t nb = lua_rawlen(L, bt);
      for (size_t b = 1; b <= nb; b++) {
        if (lua_rawgeti(L, bt, (lua_Integer)b) != LUA_TTABLE) {
          lua_pushfstring(L, "option 'blocks': block %d is not a table of states", (int)b);
          return luaL_argerror(L, 2, lua_tostring(L, -1));
        }
        size_t len = lua_rawlen(L, -1);
        if (len == 0) {
          lua_pushfstring(L, "option 'blocks': block %d is empty", (int)b);
          return luaL_argerror(L, 2, lua_tostring(L, -1));
        }
        for (size_t k = 1; k <= len; k++) {
          lua_rawgeti(L, -1, (lua_Integer)k);
          int ok;
          lua_Integer i = lua_tointegerx(L, -1, &ok);
          lua_pop(L, 1);
          if (!ok || i < 1 || (size_t)i > n) {
            lua_pushfstring(L, "option 'blocks': block %d has an entry that is not a state 1..%d", (int)b, (int)n);
            return luaL_argerror(L, 2, lua_tostring(L, -1));
          }
          if (comp[i - 1] != SIZE_MAX) {
            lua_pushfstring(L, "option 'blocks': state %d is listed twice", (int)i);
            return luaL_argerror(L, 2, lua_tostring(L, -1));
          }
          comp[i - 1] = b - 1;
        }
        lua_pop(L, 1);
      }
      for (size_t i = 0; i < n; i++)
        if (comp[i] == SIZE_MAX) {
          lua_pushfstring(L, "option 'blocks': state %d is in no block", (int)i + 1);
          return luaL_argerror(L, 2, lua_tostring(L, -1));
        }
    }
  }
  double *w = lua_newuserdatauv(L, (size_t)count * sizeof(double), 0); /* GC-owned */
  lvs_matrix **out = vectors ? lvsL_newmatrix(L) : NULL;
  int st = comp ? lvs_eigen_sectors(h, comp, (size_t)count, vectors, w, out)
                : lvs_eigen(h, (size_t)count, vectors, w, out);
  if (st == LVS_EINVAL && comp && strstr(lvs_errmsg(ctx), "couples two blocks")) {
    lua_pushfstring(L, "option 'blocks': %s", lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  if (st == LVS_ENOTHERM || (st == LVS_EINVAL && lvs_errcode(ctx) == LVS_EINVAL)) {
    lua_pushstring(L, lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lvsL_check(L, ctx, st, "eigen");
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
