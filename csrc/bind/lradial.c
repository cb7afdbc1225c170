/* lradial.c -- ls.radial(n, {rmax=, l=, charge=}) -> H, r (l a list: the
 * channels side by side, block-diagonal H; r stays one channel);
 * ls.blocks{{A, 0}, {0, B}} and ls.blockdiag(A, B, ...) -> op;
 * op:bandwidth() -> largest |i - j| of a nonzero entry. */
#include <math.h>
#include "bind/lbind.h"

static int l_radial(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int ok;
  lua_Integer n = lua_tointegerx(L, 1, &ok);
  luaL_argcheck(L, ok, 1, "number of grid points must be an integer");
  luaL_argcheck(L, n >= 2, 1, "radial grid needs at least 2 points");
  static const char *const known[] = {"rmax", "l", "charge", NULL};
  lvsL_checkoptions(L, 2, known, "radial", 2);
  double rmax = lvsL_optfield_num(L, 2, "rmax", 60.0, "radial", 2);
  double charge = lvsL_optfield_num(L, 2, "charge", 1.0, "radial", 2);
  luaL_argcheck(L, rmax > 0 && isfinite(rmax), 2, "rmax must be positive and finite");
  luaL_argcheck(L, isfinite(charge), 2, "charge must be finite");
  /* l = {l1, l2, ...}: the channels side by side (block-diagonal H) */
  size_t nl = 0;
  int *ls_ = NULL;
  if (lua_istable(L, 2)) {
    lua_getfield(L, 2, "l");
    if (lua_istable(L, -1)) {
      nl = lua_rawlen(L, -1);
      luaL_argcheck(L, nl >= 1 && nl <= 1000, 2, "l must be a number or a list of 1 to 1000 numbers");
      ls_ = lua_newuserdatauv(L, nl * sizeof(int), 0); /* GC-owned */
      for (size_t k = 0; k < nl; k++) {
        lua_rawgeti(L, -2, (lua_Integer)k + 1);
        int ok;
        lua_Integer lk = lua_tointegerx(L, -1, &ok);
        lua_pop(L, 1);
        luaL_argcheck(L, ok && lk >= 0 && lk <= 100000, 2, "l must be from 0 to 100000");
        ls_[k] = (int)lk;
      }
      lua_remove(L, -2); /* drop the list, keep the userdata on the stack */
    } else {
      lua_pop(L, 1);
    }
  }
  lua_Integer l = 0;
  if (!ls_) {
    l = lvsL_optfield_int(L, 2, "l", 0, "radial", 2);
    luaL_argcheck(L, l >= 0 && l <= 100000, 2, "l must be from 0 to 100000");
  }
  lvs_matrix **h = lvsL_newmatrix(L);
  lvs_matrix **r = lvsL_newmatrix(L);
  if (!ls_) {
    lvsL_check(L, ctx, lvs_radial(ctx, (size_t)n, rmax, (int)l, charge, h, r), "radial");
    return 2;
  }
  lvsL_check(L, ctx, lvs_radial_channels(ctx, (size_t)n, rmax, ls_, nl, charge, h, r), "radial");
  return 2;
}

/* Reads the operator grid at idx (rows of ops or 0/false) into a userdata
 * array of pointers (GC-owned, so an error leaks nothing). */
static const lvs_matrix **read_grid(lua_State *L, int idx, size_t *nbr, size_t *nbc) {
  luaL_checktype(L, idx, LUA_TTABLE);
  size_t r = lua_rawlen(L, idx), c = 0;
  luaL_argcheck(L, r > 0, idx, "expected a non-empty table of block rows");
  for (size_t i = 1; i <= r; i++) {
    if (lua_rawgeti(L, idx, (lua_Integer)i) != LUA_TTABLE) {
      lua_pushfstring(L, "block row %d is not a table", (int)i);
      luaL_argerror(L, idx, lua_tostring(L, -1));
    }
    size_t len = lua_rawlen(L, -1);
    lua_pop(L, 1);
    if (i == 1) c = len;
    if (len == 0 || len != c) {
      lua_pushfstring(L, "block row %d has %d entries, row 1 has %d", (int)i, (int)len, (int)c);
      luaL_argerror(L, idx, lua_tostring(L, -1));
    }
  }
  const lvs_matrix **g = lua_newuserdatauv(L, r * c * sizeof *g, 0);
  for (size_t i = 1; i <= r; i++) {
    lua_rawgeti(L, idx, (lua_Integer)i);
    for (size_t j = 1; j <= c; j++) {
      lua_rawgeti(L, -1, (lua_Integer)j);
      lvs_matrix *m = lvsL_testmatrix(L, -1);
      if (!m && !(lua_isnumber(L, -1) && lua_tonumber(L, -1) == 0) &&
          !(lua_isboolean(L, -1) && !lua_toboolean(L, -1))) {
        lua_pushfstring(L, "block (%d, %d) must be a matrix or 0 (a zero block)", (int)i, (int)j);
        luaL_argerror(L, idx, lua_tostring(L, -1));
      }
      g[(i - 1) * c + (j - 1)] = m;
      lua_pop(L, 1);
    }
    lua_pop(L, 1);
  }
  *nbr = r;
  *nbc = c;
  return g;
}

static int l_blocks(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  size_t r, c;
  const lvs_matrix **g = read_grid(L, 1, &r, &c);
  lvs_matrix **out = lvsL_newmatrix(L);
  int st = lvs_matrix_blocks(ctx, r, c, g, out);
  if (st == LVS_EDIM || st == LVS_EINVAL) {
    lua_pushstring(L, lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lvsL_check(L, ctx, st, "blocks");
  return 1;
}

static int l_blockdiag(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int k = lua_gettop(L);
  luaL_argcheck(L, k >= 1, 1, "at least one matrix expected");
  for (int i = 1; i <= k; i++) lvsL_checkmatrix(L, i);
  const lvs_matrix **g = lua_newuserdatauv(L, (size_t)k * (size_t)k * sizeof *g, 0);
  for (int i = 0; i < k; i++)
    for (int j = 0; j < k; j++) g[i * k + j] = i == j ? lvsL_checkmatrix(L, i + 1) : NULL;
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_blocks(ctx, (size_t)k, (size_t)k, g, out), "blockdiag");
  return 1;
}

static int m_bandwidth(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *a = lvsL_checkmatrix(L, 1);
  size_t b;
  lvsL_check(L, ctx, lvs_matrix_bandwidth(a, &b), "bandwidth");
  lua_pushinteger(L, (lua_Integer)b);
  return 1;
}

void lvsL_open_radial(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"radial", l_radial}, {"blocks", l_blocks},
                                 {"blockdiag", l_blockdiag}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
  static const luaL_Reg methods[] = {{"bandwidth", m_bandwidth}, {NULL, NULL}};
  luaL_getmetatable(L, LVS_MATRIX_MT);
  lua_getfield(L, -1, "__index");
  lvsL_setfuncs(L, methods, ctxidx);
  lua_pop(L, 2);
}
