/* lrandom.c -- ls.random_orthogonal(n, {seed=}) -> n x n Haar-random
 * orthogonal matrix (dense), reproducible from its seed. */
#include "bind/lbind.h"

static int l_random_orthogonal(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  int ok;
  lua_Integer n = lua_tointegerx(L, 1, &ok);
  luaL_argcheck(L, ok, 1, "dimension must be an integer");
  luaL_argcheck(L, n >= 1, 1, "dimension must be at least 1");
  static const char *const known[] = {"seed", NULL};
  lvsL_checkoptions(L, 2, known, "random_orthogonal", 2);
  lua_Integer seed = lvsL_optfield_int(L, 2, "seed", 1, "random_orthogonal", 2);
  luaL_argcheck(L, seed >= 0, 2, "seed must be a non-negative integer");
  lvs_matrix **q = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_random_orthogonal(ctx, (size_t)n, (uint64_t)seed, q), "random_orthogonal");
  return 1;
}

void lvsL_open_random(lua_State *L, int ctxidx) {
  static const luaL_Reg fns[] = {{"random_orthogonal", l_random_orthogonal}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}
