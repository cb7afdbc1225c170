/* lseries.c -- ls.perturb(H0, V, {order=, levels=, degen_tol=, normalized=})
 * -> series userdata "levelshift.series" (C methods here; check, pade,
 * radius, totable and the printed report are Lua sugar in
 * lua/levelshift/series.lua). */
#include <math.h>
#include <string.h>
#include "bind/lbind.h"

#define LVS_SERIES_MT "levelshift.series"

static lvs_series *checkseries(lua_State *L, int idx) {
  lvs_series **p = luaL_checkudata(L, idx, LVS_SERIES_MT);
  if (!*p) luaL_argerror(L, idx, "attempt to use a closed series");
  return *p;
}

static int s_gc(lua_State *L) {
  lvs_series **p = luaL_checkudata(L, 1, LVS_SERIES_MT);
  lvs_series_free(*p);
  *p = NULL;
  return 0;
}

/* 1-based level argument -> 0-based, with a clear error */
static size_t checklevel(lua_State *L, lvs_series *s, int idx, const char *fname) {
  lua_Integer lev = luaL_checkinteger(L, idx);
  size_t n = lvs_series_dim(s);
  if (lev < 1 || (size_t)lev > n) {
    lua_pushfstring(L, "level must be from 1 to %d, got %d", (int)n, (int)lev);
    luaL_argerror(L, idx, lua_tostring(L, -1));
  }
  if (!lvs_series_has(s, (size_t)lev - 1)) {
    lua_pushfstring(L, "level %d was not computed (not in the 'levels' option)", (int)lev);
    luaL_argerror(L, idx, lua_tostring(L, -1));
  }
  (void)fname;
  return (size_t)lev - 1;
}

static int checkorder(lua_State *L, lvs_series *s, int idx) {
  lua_Integer k = luaL_checkinteger(L, idx);
  if (k < 0 || k > lvs_series_order(s)) {
    lua_pushfstring(L, "order must be from 0 to %d, got %d", lvs_series_order(s), (int)k);
    luaL_argerror(L, idx, lua_tostring(L, -1));
  }
  return (int)k;
}

/* groups = "auto" | "exact" | {{levels...}, ...}, lambda_max, near_factor,
 * near_max (option table at 3); hand-chosen members live in a GC-owned
 * userdata left on the stack */
static void opt_groups(lua_State *L, size_t n, lvs_series_opts *o) {
  if (!lua_istable(L, 3)) return;
  o->lambda_max = lvsL_optfield_num(L, 3, "lambda_max", 1.0, "perturb", 3);
  if (!(o->lambda_max > 0) || !isfinite(o->lambda_max)) {
    lua_pushfstring(L, "lambda_max must be a positive finite number, got %f", o->lambda_max);
    luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  o->near_factor = lvsL_optfield_num(L, 3, "near_factor", 4.0, "perturb", 3);
  if (!(o->near_factor >= 0) || !isfinite(o->near_factor)) {
    lua_pushfstring(L, "near_factor must be a finite number >= 0, got %f", o->near_factor);
    luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  lua_Integer nm = lvsL_optfield_int(L, 3, "near_max", 8, "perturb", 3);
  if (nm < 2 || nm > 4096) {
    lua_pushfstring(L, "near_max must be from 2 to 4096, got %d", (int)nm);
    luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  o->near_max = (size_t)nm;
  lua_getfield(L, 3, "groups");
  int t = lua_type(L, -1);
  if (t == LUA_TNIL) {
    lua_pop(L, 1);
    return;
  }
  if (t == LUA_TSTRING) {
    const char *m = lua_tostring(L, -1);
    if (strcmp(m, "auto") == 0) o->groups = LVS_GROUPS_AUTO;
    else if (strcmp(m, "exact") == 0) o->groups = LVS_GROUPS_EXACT;
    else {
      lua_pushfstring(L, "option 'groups' must be \"auto\", \"exact\" or a list of level lists, got \"%s\"", m);
      luaL_argerror(L, 3, lua_tostring(L, -1));
    }
    lua_pop(L, 1);
    return;
  }
  if (t != LUA_TTABLE) luaL_argerror(L, 3, "option 'groups' must be \"auto\", \"exact\" or a list of level lists");
  int gi = lua_gettop(L);
  size_t ng = (size_t)lua_rawlen(L, gi), total = 0;
  if (ng == 0) luaL_argerror(L, 3, "option 'groups' is an empty list");
  for (size_t g = 1; g <= ng; g++) {
    lua_rawgeti(L, gi, (lua_Integer)g);
    if (!lua_istable(L, -1) || lua_rawlen(L, -1) == 0) {
      lua_pushfstring(L, "groups[%d] must be a non-empty list of level numbers", (int)g);
      luaL_argerror(L, 3, lua_tostring(L, -1));
    }
    total += (size_t)lua_rawlen(L, -1);
    lua_pop(L, 1);
  }
  size_t *buf = lua_newuserdatauv(L, (total + ng) * sizeof *buf, 0); /* GC-owned, stays on the stack */
  size_t *len = buf + total, q = 0;
  for (size_t g = 1; g <= ng; g++) {
    lua_rawgeti(L, gi, (lua_Integer)g);
    size_t d = (size_t)lua_rawlen(L, -1);
    len[g - 1] = d;
    for (size_t i = 1; i <= d; i++) {
      lua_rawgeti(L, -1, (lua_Integer)i);
      int ok;
      lua_Integer lv = lua_tointegerx(L, -1, &ok);
      lua_pop(L, 1);
      if (!ok || lv < 1 || (size_t)lv > n) {
        lua_pushfstring(L, "groups[%d][%d] must be a level from 1 to %d", (int)g, (int)i, (int)n);
        luaL_argerror(L, 3, lua_tostring(L, -1));
      }
      buf[q++] = (size_t)lv - 1;
    }
    lua_pop(L, 1);
  }
  o->groups = LVS_GROUPS_HAND;
  o->hand = buf;
  o->hand_len = len;
  o->nhand = ng;
}

static int l_perturb(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_matrix *h0 = lvsL_checkmatrix(L, 1);
  lvs_matrix *v = lvsL_checkmatrix(L, 2);
  static const char *const known[] = {"order",      "levels",      "degen_tol", "normalized", "states", "basis",
                                      "groups",     "lambda_max", "near_factor", "near_max",  NULL};
  lvsL_checkoptions(L, 3, known, "perturb", 3);
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0)) {
    lua_pushfstring(L, "H0 must be square, got %dx%d", (int)n, (int)lvs_matrix_cols(h0));
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n) {
    lua_pushfstring(L, "V is %dx%d but H0 is %dx%d", (int)lvs_matrix_rows(v), (int)lvs_matrix_cols(v), (int)n,
                    (int)n);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  lua_Integer order = lvsL_optfield_int(L, 3, "order", 4, "perturb", 3);
  if (order < 1 || order > 1000) {
    lua_pushfstring(L, "order must be from 1 to 1000, got %d", (int)order);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  double tol = lvsL_optfield_num(L, 3, "degen_tol", 1e-10, "perturb", 3);
  if (!(tol >= 0) || tol > 0.5) {
    lua_pushfstring(L, "degen_tol must be from 0 to 0.5, got %f", tol);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  int normalized = 0, states = 1;
  /* basis = B: labels in the report (B:describe of each level's state) */
  if (lua_istable(L, 3)) lua_getfield(L, 3, "basis");
  else lua_pushnil(L);
  int bidx = lua_gettop(L);
  if (!lua_isnil(L, bidx)) {
    if (!luaL_testudata(L, bidx, LVS_BASIS_MT)) return luaL_argerror(L, 3, "'basis' must be a basis");
    if (lvs_basis_dim(lvsL_checkbasis(L, bidx)) != n) {
      lua_pushfstring(L, "'basis' has %d states but H0 is %dx%d", (int)lvs_basis_dim(lvsL_checkbasis(L, bidx)), (int)n,
                      (int)n);
      return luaL_argerror(L, 3, lua_tostring(L, -1));
    }
  }
  size_t nlev = 0;
  size_t *levels = NULL;
  if (lua_istable(L, 3)) {
    lua_getfield(L, 3, "normalized");
    normalized = lua_toboolean(L, -1);
    lua_pop(L, 1);
    lua_getfield(L, 3, "states");
    if (!lua_isnil(L, -1)) states = lua_toboolean(L, -1);
    lua_pop(L, 1);
    lua_getfield(L, 3, "levels");
    if (!lua_isnil(L, -1)) {
      if (!lua_istable(L, -1)) return luaL_argerror(L, 3, "option 'levels' must be a list of level numbers");
      nlev = (size_t)lua_rawlen(L, -1);
      if (nlev == 0) return luaL_argerror(L, 3, "option 'levels' is empty");
      levels = lua_newuserdatauv(L, nlev * sizeof *levels, 0); /* GC-owned */
      for (size_t i = 0; i < nlev; i++) {
        lua_rawgeti(L, -2, (lua_Integer)i + 1);
        int ok;
        lua_Integer lv = lua_tointegerx(L, -1, &ok);
        lua_pop(L, 1);
        if (!ok || lv < 1 || (size_t)lv > n) {
          lua_pushfstring(L, "levels[%d] must be a level from 1 to %d", (int)i + 1, (int)n);
          return luaL_argerror(L, 3, lua_tostring(L, -1));
        }
        levels[i] = (size_t)lv - 1;
      }
    }
  }
  lvs_series_opts o;
  lvs_series_opts_init(&o);
  o.degen_tol = tol;
  o.flags = (normalized ? LVS_SERIES_NORMALIZED : 0) | (states ? 0 : LVS_SERIES_NO_STATES);
  opt_groups(L, n, &o);
  lvs_series **p = lua_newuserdatauv(L, sizeof *p, 3);
  *p = NULL;
  luaL_setmetatable(L, LVS_SERIES_MT);
  int st = lvs_series_new_ex(h0, v, (int)order, levels, nlev, &o, p);
  if (st == LVS_ENOTHERM || st == LVS_EDIM) {
    int arg = strncmp(lvs_errmsg(ctx), "H0", 2) == 0 ? 1 : 2;
    lua_pushstring(L, lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, arg, lua_tostring(L, -1));
  }
  lvsL_check(L, ctx, st, "perturb");
  lua_pushvalue(L, 1);
  lua_setiuservalue(L, -2, 1);
  lua_pushvalue(L, 2);
  lua_setiuservalue(L, -2, 2);
  lua_pushvalue(L, bidx);
  lua_setiuservalue(L, -2, 3);
  return 1;
}

/* s:label(level) -> B:describe of the level's basis state ("~" in front when
 * it is only the largest component of a degenerate member's combination),
 * or nil without a basis or when H0 is not diagonal */
static int s_label(lua_State *L) {
  lvs_series *s = checkseries(L, 1);
  size_t lev = checklevel(L, s, 2, "label");
  int pure;
  size_t st = lvs_series_basis_state(s, lev, &pure);
  if (lua_getiuservalue(L, 1, 3) == LUA_TNIL || st == (size_t)-1) {
    lua_pushnil(L);
    return 1;
  }
  int bidx = lua_gettop(L);
  if (!pure) lua_pushliteral(L, "~");
  lua_getfield(L, bidx, "describe");
  lua_pushvalue(L, bidx);
  lua_pushinteger(L, (lua_Integer)st + 1);
  lua_call(L, 2, 1);
  if (!pure) lua_concat(L, 2);
  return 1;
}

static int s_energy(lua_State *L) {
  lvs_series *s = checkseries(L, 1);
  size_t lev = checklevel(L, s, 2, "energy");
  int k = checkorder(L, s, 3);
  double e;
  lvs_series_energy(s, lev, k, &e);
  lua_pushnumber(L, e);
  return 1;
}

static int s_at(lua_State *L) {
  lvs_series *s = checkseries(L, 1);
  size_t lev = checklevel(L, s, 2, "at");
  double lam = luaL_checknumber(L, 3);
  if (!isfinite(lam)) return luaL_argerror(L, 3, "lambda must be finite");
  int upto = lvs_series_order(s);
  if (!lua_isnoneornil(L, 4)) upto = checkorder(L, s, 4);
  double e;
  lvsL_check(L, lvsL_ctx(L), lvs_series_at_order(s, lev, lam, upto, &e), "at");
  lua_pushnumber(L, e);
  return 1;
}

static int s_state(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_series *s = checkseries(L, 1);
  size_t lev = checklevel(L, s, 2, "state");
  int k = checkorder(L, s, 3);
  size_t n = lvs_series_dim(s);
  int sorders;
  lvs_series_info(s, lev, NULL, NULL, NULL, &sorders);
  if (sorders < 0) return luaL_argerror(L, 1, "no state corrections were kept (perturb option states = false)");
  if (k > sorders) {
    int split;
    lvs_series_info(s, lev, NULL, &split, NULL, NULL);
    lua_pushfstring(L, "level %d was split from its degenerate group at order %d: its state is available to order %d",
                    (int)lev + 1, split, sorders);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  double *psi = lua_newuserdatauv(L, 2 * n * sizeof *psi, 0);
  lvsL_check(L, ctx, lvs_series_state(s, lev, k, psi), "state");
  int cplx = 0;
  for (size_t i = 0; i < n; i++)
    if (psi[2 * i + 1] != 0) cplx = 1;
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, ctx, lvs_matrix_new(ctx, n, 1, cplx, out), "state");
  for (size_t i = 0; i < n; i++) lvs_matrix_set(*out, i, 0, psi[2 * i], cplx ? psi[2 * i + 1] : 0.0);
  return 1;
}

static int s_info(lua_State *L) {
  lvs_series *s = checkseries(L, 1);
  size_t lev = checklevel(L, s, 2, "info");
  size_t g;
  int split, sorders;
  double md, e0;
  lvs_series_info(s, lev, &g, &split, &md, &sorders);
  lvs_series_energy(s, lev, 0, &e0);
  lua_createtable(L, 0, 5);
  lua_pushinteger(L, (lua_Integer)g + 1);
  lua_setfield(L, -2, "group");
  lua_pushinteger(L, split);
  lua_setfield(L, -2, "split_order");
  lua_pushnumber(L, md);
  lua_setfield(L, -2, "min_denominator");
  lua_pushinteger(L, sorders);
  lua_setfield(L, -2, "state_orders");
  lua_pushnumber(L, e0);
  lua_setfield(L, -2, "E0");
  int sp = lvs_series_space_of(s, lev);
  if (sp >= 0) {
    lua_pushinteger(L, sp + 1);
    lua_setfield(L, -2, "model_space");
  }
  size_t nb;
  double gap, kap;
  lvs_series_neighbour(s, lev, &nb, &gap, &kap);
  if (!isnan(kap)) { /* the nearest neighbour left outside, with its coupling */
    lua_createtable(L, 0, 3);
    if (nb != (size_t)-1) {
      lua_pushinteger(L, (lua_Integer)nb + 1);
      lua_setfield(L, -2, "level");
      lua_pushnumber(L, gap);
      lua_setfield(L, -2, "gap");
    }
    lua_pushnumber(L, kap);
    lua_setfield(L, -2, "coupling");
    lua_setfield(L, -2, "neighbour");
  }
  return 1;
}

/* s:groups() -> one entry per model space and per exact group of the
 * computed levels, in level order: {members=, split_orders=, E0=,
 * split_order=, kind = "single" | "exact" | "near", and for "near":
 * model_space=, why=, hand=, order=, subgroups = {{...}, ...}} */
static void groups_table(lua_State *L, lvs_series *s) {
  size_t n = lvs_series_dim(s), nsp = lvs_series_nspaces(s);
  lua_newtable(L);
  int tidx = lua_gettop(L);
  int *spent = lua_newuserdatauv(L, (nsp + 1) * sizeof *spent, 0); /* entry of each space */
  for (size_t q = 0; q <= nsp; q++) spent[q] = 0;
  size_t last = (size_t)-1, lastsub = (size_t)-1;
  int ng = 0, cur = 0;
  for (size_t i = 0; i < n; i++) {
    if (!lvs_series_has(s, i)) continue;
    size_t g;
    int split;
    lvs_series_info(s, i, &g, &split, NULL, NULL);
    int sp = lvs_series_space_of(s, i);
    double e0;
    lvs_series_energy(s, i, 0, &e0);
    if (sp >= 0 && spent[sp]) {
      cur = spent[sp];
    } else if (sp >= 0 || g != last) {
      lua_createtable(L, 0, 8);
      lua_newtable(L);
      lua_setfield(L, -2, "members");
      lua_newtable(L);
      lua_setfield(L, -2, "split_orders");
      lua_pushnumber(L, e0);
      lua_setfield(L, -2, "E0");
      lua_pushinteger(L, 0);
      lua_setfield(L, -2, "split_order");
      if (sp >= 0) {
        const char *why;
        int hand, ord;
        lvs_series_space(s, (size_t)sp, NULL, NULL, &ord, &hand, &why);
        lua_pushliteral(L, "near");
        lua_setfield(L, -2, "kind");
        lua_pushinteger(L, sp + 1);
        lua_setfield(L, -2, "model_space");
        lua_pushstring(L, why);
        lua_setfield(L, -2, "why");
        lua_pushboolean(L, hand);
        lua_setfield(L, -2, "hand");
        lua_pushinteger(L, ord);
        lua_setfield(L, -2, "order");
        lua_newtable(L);
        lua_setfield(L, -2, "subgroups");
      } else {
        lua_pushliteral(L, "single");
        lua_setfield(L, -2, "kind");
      }
      lua_rawseti(L, tidx, ++ng);
      cur = ng;
      if (sp >= 0) spent[sp] = ng;
      last = g;
    }
    lua_rawgeti(L, tidx, cur);
    lua_getfield(L, -1, "members");
    lua_Integer nmem = (lua_Integer)lua_rawlen(L, -1) + 1;
    lua_pushinteger(L, (lua_Integer)i + 1);
    lua_rawseti(L, -2, nmem);
    lua_pop(L, 1);
    if (nmem == 2 && sp < 0) { /* a second member: an exact group */
      lua_pushliteral(L, "exact");
      lua_setfield(L, -2, "kind");
    }
    if (sp >= 0) { /* the exact groups inside a model space */
      lua_getfield(L, -1, "subgroups");
      lua_Integer ns = (lua_Integer)lua_rawlen(L, -1);
      if (ns == 0 || g != lastsub) {
        lua_newtable(L);
        lua_rawseti(L, -2, ++ns);
      }
      lua_rawgeti(L, -1, ns);
      lua_pushinteger(L, (lua_Integer)i + 1);
      lua_rawseti(L, -2, (lua_Integer)lua_rawlen(L, -2) + 1);
      lua_pop(L, 2);
      lastsub = g;
    }
    lua_getfield(L, -1, "split_orders");
    lua_pushinteger(L, split);
    lua_rawseti(L, -2, (lua_Integer)lua_rawlen(L, -2) + 1);
    lua_pop(L, 1);
    /* group split_order: the largest member split order (-1 if any never split) */
    lua_getfield(L, -1, "split_order");
    lua_Integer so = lua_tointeger(L, -1);
    lua_pop(L, 1);
    if (so != -1 && (split == -1 || split > so)) {
      lua_pushinteger(L, split);
      lua_setfield(L, -2, "split_order");
    }
    lua_pop(L, 1);
  }
  lua_pop(L, 1); /* spent */
}

static int s_groups(lua_State *L) {
  groups_table(L, checkseries(L, 1));
  return 1;
}

/* s:group_term(g, k) -> term k (d x d op) of the effective Hamiltonian of
 * entry g of s:groups(), a model space */
static int s_group_term(lua_State *L) {
  lvs_series *s = checkseries(L, 1);
  lua_Integer g = luaL_checkinteger(L, 2);
  lua_Integer k = luaL_checkinteger(L, 3);
  groups_table(L, s);
  lua_Integer ng = (lua_Integer)lua_rawlen(L, -1);
  if (g < 1 || g > ng) {
    lua_pushfstring(L, "group must be from 1 to %d (entries of s:groups()), got %d", (int)ng, (int)g);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  lua_rawgeti(L, -1, g);
  lua_getfield(L, -1, "model_space");
  if (lua_isnil(L, -1)) {
    lua_pushfstring(L, "group %d is not a model space of nearly degenerate levels (its levels are exactly "
                    "degenerate or single): ls.effective(H0, V, {levels = ...}) gives its matrix", (int)g);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  size_t sp = (size_t)lua_tointeger(L, -1) - 1;
  int ord;
  lvs_series_space(s, sp, NULL, NULL, &ord, NULL, NULL);
  if (k < 0 || k > ord) {
    lua_pushfstring(L, "order must be from 0 to %d, got %d", ord, (int)k);
    return luaL_argerror(L, 3, lua_tostring(L, -1));
  }
  lvs_matrix **out = lvsL_newmatrix(L);
  lvsL_check(L, lvsL_ctx(L), lvs_series_space_term(s, sp, (int)k, out), "group_term");
  return 1;
}

/* s:grouping() -> lambda_max, near_factor (the joining rule's numbers), mode ("auto", "exact", "hand"),
 * spacing (the median gap of H0's levels, the scale degen_tol is relative to) */
static int s_grouping(lua_State *L) {
  double lm, nf;
  lvs_series *s = checkseries(L, 1);
  lvs_series_grouping(s, &lm, &nf);
  lua_pushnumber(L, lm);
  lua_pushnumber(L, nf);
  lua_pushstring(L, lvs_series_groups_mode(s) == LVS_GROUPS_EXACT ? "exact"
                    : lvs_series_groups_mode(s) == LVS_GROUPS_HAND ? "hand" : "auto");
  lua_pushnumber(L, lvs_series_spacing(s));
  return 4;
}

/* s:notes() -> why no model space was formed where one was looked for ("" none) */
static int s_notes(lua_State *L) {
  lua_pushstring(L, lvs_series_notes(checkseries(L, 1)));
  return 1;
}

static int s_dim(lua_State *L) {
  lua_pushinteger(L, (lua_Integer)lvs_series_dim(checkseries(L, 1)));
  return 1;
}
static int s_order(lua_State *L) {
  lua_pushinteger(L, lvs_series_order(checkseries(L, 1)));
  return 1;
}
static int s_vnorm(lua_State *L) {
  lua_pushnumber(L, lvs_series_vnorm(checkseries(L, 1)));
  return 1;
}
/* s:solver() -> how the orders were solved ("diagonal", "eigenbasis",
 * "bordered dense", "bordered LU", "MINRES"), resolvent solves, MINRES
 * iterations */
static int s_solver(lua_State *L) {
  size_t solves = 0, iters = 0;
  const char *m = lvs_series_solver(checkseries(L, 1), &solves, &iters);
  lua_pushstring(L, m);
  lua_pushinteger(L, (lua_Integer)solves);
  lua_pushinteger(L, (lua_Integer)iters);
  return 3;
}
static int s_levels(lua_State *L) {
  lvs_series *s = checkseries(L, 1);
  lua_newtable(L);
  int c = 0;
  for (size_t i = 0; i < lvs_series_dim(s); i++)
    if (lvs_series_has(s, i)) {
      lua_pushinteger(L, (lua_Integer)i + 1);
      lua_rawseti(L, -2, ++c);
    }
  return 1;
}
/* s:operators() -> H0, V (the matrices the series was made from) */
static int s_operators(lua_State *L) {
  checkseries(L, 1);
  lua_getiuservalue(L, 1, 1);
  lua_getiuservalue(L, 1, 2);
  return 2;
}

void lvsL_open_series(lua_State *L, int ctxidx) {
  static const luaL_Reg meta[] = {{"__gc", s_gc}, {"__close", s_gc}, {NULL, NULL}};
  static const luaL_Reg methods[] = {{"energy", s_energy}, {"at", s_at},         {"state", s_state},
                                     {"info", s_info},     {"groups", s_groups}, {"dim", s_dim},
                                     {"order", s_order},   {"vnorm", s_vnorm},   {"chosen", s_levels},
                                     {"operators", s_operators}, {"label", s_label}, {"solver", s_solver},
                                     {"group_term", s_group_term}, {"notes", s_notes}, {"grouping", s_grouping},
                                     {NULL, NULL}};
  luaL_newmetatable(L, LVS_SERIES_MT);
  lvsL_setfuncs(L, meta, ctxidx);
  lua_newtable(L);
  lvsL_setfuncs(L, methods, ctxidx);
  lua_pushvalue(L, -1);
  lua_setfield(L, -4, "_series_methods"); /* sugar adds Lua methods here */
  lua_setfield(L, -2, "__index");
  lua_pushvalue(L, -1);
  lua_setfield(L, -3, "_series_meta"); /* sugar sets __tostring */
  lua_pop(L, 1);
  static const luaL_Reg fns[] = {{"perturb", l_perturb}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}
