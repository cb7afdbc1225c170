/* lsweep.c -- core.sweep{H0=, V=, from=, to=, steps=, count=, threads=,
 * series=, journal=, shard=, shards=, merge=, progress=, param=, param_unit=,
 * energy_unit=, method = "auto"|"dense"|"band"|"krylov"} -> userdata "levelshift.sweep": sw.p, sw.count,
 * sw.min_overlap, sw.method, sw.series_order, sw.partial, sw.done, sw:level(k),
 * sw:series(k), sw:crossings(), sw:write(path), sw:_remove_journals().
 * The Lua driver (lua/levelshift/sweep.lua) wraps it as ls.sweep. */
#include <stdio.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include "bind/lbind.h"

#define LVS_SWEEP_MT "levelshift.sweep"

typedef struct {
  lvs_sweep *s;
} lsweep;

static lvs_sweep *checksweep(lua_State *L, int idx) {
  lsweep *u = luaL_checkudata(L, idx, LVS_SWEEP_MT);
  if (!u->s) luaL_argerror(L, idx, "sweep is closed");
  return u->s;
}

static lvs_matrix *field_matrix(lua_State *L, const char *key) {
  lua_getfield(L, 1, key);
  if (lua_isnil(L, -1)) {
    lua_pushfstring(L, "%s is required (an op)", key);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lvs_matrix *m = lvsL_testmatrix(L, -1);
  if (!m) {
    lua_pushfstring(L, "%s must be an op, got %s", key, luaL_typename(L, -2));
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_pop(L, 1); /* the table still references it */
  return m;
}

static double field_num(lua_State *L, const char *key) {
  lua_getfield(L, 1, key);
  if (!lua_isnumber(L, -1)) {
    if (lua_isnil(L, -1)) lua_pushfstring(L, "'%s' is required (a number)", key);
    else lua_pushfstring(L, "'%s' must be a number", key);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  double v = lua_tonumber(L, -1);
  lua_pop(L, 1);
  return v;
}

static const char *opt_string(lua_State *L, const char *key) {
  lua_getfield(L, 1, key);
  const char *r = NULL;
  if (!lua_isnil(L, -1)) {
    if (lua_type(L, -1) != LUA_TSTRING) {
      lua_pushfstring(L, "'%s' must be a string, got %s", key, luaL_typename(L, -1));
      luaL_argerror(L, 1, lua_tostring(L, -1));
    }
    r = lua_tostring(L, -1);
  }
  lua_pop(L, 1); /* the table still references it */
  return r;
}

/* progress on stderr: "sweep: done/total points", at most every 0.2 s */
typedef struct {
  int shown;
  double last;
  size_t last_done;
} progress_state;

static double now_s(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void show_progress(void *ud, size_t done, size_t total) {
  progress_state *ps = ud;
  double t = now_s();
  if (done != total && ps->shown && t - ps->last < 0.2) return;
  if (done == ps->last_done) return;
  ps->last = t;
  ps->last_done = done;
  ps->shown = 1;
  fprintf(stderr, "\rsweep: %zu/%zu points", done, total);
  fflush(stderr);
}

/* H(p) of a family given as a Lua function (called from this thread only) */
typedef struct {
  lua_State *L;
  int fidx;
  size_t n;
  int cplx;
} family_ud;

static int call_family(void *ud, double p, double *out, char *msg, size_t msglen) {
  family_ud *fu = ud;
  lua_State *L = fu->L;
  int top = lua_gettop(L);
  lua_pushvalue(L, fu->fidx);
  lua_pushnumber(L, p);
  if (lua_pcall(L, 1, 1, 0) != LUA_OK) {
    const char *e = lua_tostring(L, -1);
    snprintf(msg, msglen, "%s", e ? e : "(error object is not a string)");
    lua_settop(L, top);
    return 1;
  }
  lvs_matrix *m = lvsL_testmatrix(L, -1);
  if (!m) {
    snprintf(msg, msglen, "H must return an op, got %s", luaL_typename(L, -1));
    lua_settop(L, top);
    return 1;
  }
  size_t n = fu->n;
  if (lvs_matrix_rows(m) != n || lvs_matrix_cols(m) != n) {
    snprintf(msg, msglen, "H returned a %zux%zu op, H(from) is %zux%zu", lvs_matrix_rows(m), lvs_matrix_cols(m), n, n);
    lua_settop(L, top);
    return 1;
  }
  if (lvs_matrix_is_complex(m) && !fu->cplx) {
    snprintf(msg, msglen, "H returned a complex op but H(from) and H(to) are real");
    lua_settop(L, top);
    return 1;
  }
  lvs_matrix *d = NULL;
  if (lvs_matrix_visible(m, 1, &d) != LVS_OK) {
    snprintf(msg, msglen, "cannot read the op H returned");
    lua_settop(L, top);
    return 1;
  }
  for (size_t j = 0; j < n; j++)
    for (size_t i = 0; i < n; i++) {
      double re, im;
      lvs_matrix_get(d, i, j, &re, &im);
      size_t at = j * n + i;
      if (fu->cplx) { out[2 * at] = re; out[2 * at + 1] = im; } else out[at] = re;
    }
  lvs_matrix_free(d);
  lua_settop(L, top);
  return 0;
}

/* H0 and V, or H given as a function p -> op (then H(from) and H(to) stand
 * for H0 and V, pinned in the registry, and fu gets the function's stack
 * slot); returns whether H is a family */
static int sweep_model(lua_State *L, lvs_matrix **ph0, lvs_matrix **pv, family_ud *fu) {
  lvs_matrix *h0, *v;
  lua_getfield(L, 1, "H");
  int family = !lua_isnil(L, -1);
  if (family && !lua_isfunction(L, -1)) {
    lua_pushfstring(L, "H must be a function p -> op, got %s", luaL_typename(L, -2));
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_pop(L, 1);
  if (family) {
    lua_getfield(L, 1, "H0");
    lua_getfield(L, 1, "V");
    if (!lua_isnil(L, -1) || !lua_isnil(L, -2))
      luaL_argerror(L, 1, "give either H (a function p -> op) or H0 and V, not both");
    lua_pop(L, 2);
    /* H(from) and H(to): size, kind and the journal's fingerprint; both
     * stay on this call's stack (a sweep inside the family function, or
     * one in another coroutine, has its own) */
    int ends[2];
    for (int end = 0; end < 2; end++) {
      double pe = field_num(L, end ? "to" : "from");
      lua_getfield(L, 1, "H");
      lua_pushnumber(L, pe);
      lua_call(L, 1, 1);
      if (!lvsL_testmatrix(L, -1)) {
        lua_pushfstring(L, "H(%f) must return an op, got %s", pe, luaL_typename(L, -1));
        luaL_argerror(L, 1, lua_tostring(L, -1));
      }
      ends[end] = lua_gettop(L);
    }
    h0 = lvsL_testmatrix(L, ends[0]);
    v = lvsL_testmatrix(L, ends[1]);
    /* keep both on the stack (below the userdata pushed later) */
    lua_getfield(L, 1, "H");
    fu->fidx = lua_gettop(L);
    if (lvs_matrix_rows(v) != lvs_matrix_rows(h0) || lvs_matrix_cols(v) != lvs_matrix_cols(h0)) {
      lua_pushfstring(L, "size mismatch: H(from) is %dx%d but H(to) is %dx%d", (int)lvs_matrix_rows(h0),
                      (int)lvs_matrix_cols(h0), (int)lvs_matrix_rows(v), (int)lvs_matrix_cols(v));
      luaL_argerror(L, 1, lua_tostring(L, -1));
    }
  } else {
    h0 = field_matrix(L, "H0");
    v = field_matrix(L, "V");
  }
  *ph0 = h0;
  *pv = v;
  return family;
}

/* the sweep's sizes and options (checked), into a */
typedef struct {
  double from, to;
  lua_Integer steps, count, threads, series, shard, shards;
  const char *journal;
  int merge, progress, method;
} sweep_args;

static void sweep_run_args(lua_State *L, int family, const lvs_matrix *h0, const lvs_matrix *v, sweep_args *a) {
  size_t n = lvs_matrix_rows(h0);
  if (n != lvs_matrix_cols(h0)) {
    lua_pushfstring(L, "H0 must be square, got %dx%d", (int)n, (int)lvs_matrix_cols(h0));
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  if (lvs_matrix_rows(v) != n || lvs_matrix_cols(v) != n) {
    lua_pushfstring(L, "size mismatch: H0 is %dx%d but V is %dx%d", (int)n, (int)n,
                    (int)lvs_matrix_rows(v), (int)lvs_matrix_cols(v));
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  double from = field_num(L, "from"), to = field_num(L, "to");
  if (from == to) {
    lua_pushfstring(L, "from and to are equal (%f): nothing to sweep", from);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_Integer steps = lvsL_optfield_int(L, 1, "steps", 100, "sweep", 1);
  if (steps < 1 || steps > 1000000) {
    lua_pushfstring(L, "steps must be from 1 to 1000000, got %I", steps);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_Integer count = lvsL_optfield_int(L, 1, "count", (lua_Integer)n, "sweep", 1);
  if (count < 1 || (size_t)count > n) {
    lua_pushfstring(L, "count must be from 1 to %d, got %I", (int)n, count);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_Integer threads = lvsL_optfield_int(L, 1, "threads", 2, "sweep", 1);
  if (threads < 1 || threads > 64) {
    lua_pushfstring(L, "threads must be from 1 to 64, got %I", threads);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_Integer series = lvsL_optfield_int(L, 1, "series", 0, "sweep", 1);
  if (series < 0 || series > 1000) {
    lua_pushfstring(L, "series must be an order from 1 to 1000 (0: none), got %I", series);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  const char *journal = opt_string(L, "journal");
  lua_Integer shard = lvsL_optfield_int(L, 1, "shard", 0, "sweep", 1);
  lua_Integer shards = lvsL_optfield_int(L, 1, "shards", 0, "sweep", 1);
  if (shards < 0 || shards > 1000000 || (shards > 0 && (shard < 1 || shard > shards)) || (shards == 0 && shard != 0)) {
    lua_pushfstring(L, "shard must be from 1 to shards (a positive count), got shard %I of %I", shard, shards);
    luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lua_getfield(L, 1, "merge");
  int merge = lua_toboolean(L, -1);
  lua_pop(L, 1);
  if (journal) lvsL_may_write(L, "sweep (journal, out=)", journal);
  if ((shards || merge) && !journal)
    luaL_argerror(L, 1, "shards and merges need 'journal' (the output path)");
  if (shards && merge) luaL_argerror(L, 1, "a shard cannot merge");
  lua_getfield(L, 1, "progress");
  int progress = lua_isnil(L, -1) ? isatty(STDERR_FILENO) : lua_toboolean(L, -1);
  lua_pop(L, 1);
  const char *mname = opt_string(L, "method");
  int method = LVS_SWEEP_AUTO;
  if (mname) {
    static const char *const names[] = {"auto", "dense", "band", "krylov", NULL};
    int k = 0;
    while (names[k] && strcmp(names[k], mname) != 0) k++;
    if (!names[k]) luaL_argerror(L, 1, "option 'method' must be \"auto\", \"dense\", \"band\" or \"krylov\"");
    method = k;
    if (family && method >= LVS_SWEEP_BAND) {
      lua_pushfstring(L, "method '%s' needs H0 and V (not H given as a function)", mname);
      luaL_argerror(L, 1, lua_tostring(L, -1));
    }
    if (method == LVS_SWEEP_BAND && (lvs_matrix_is_complex(h0) || lvs_matrix_is_complex(v) || n < 16)) {
      lua_pushfstring(L, "method 'band' needs a real H0 and V of at least 16 states (got %d, %s)", (int)n,
                      lvs_matrix_is_complex(h0) || lvs_matrix_is_complex(v) ? "complex" : "real");
      luaL_argerror(L, 1, lua_tostring(L, -1));
    }
  }
  a->from = from, a->to = to, a->steps = steps, a->count = count, a->threads = threads, a->series = series;
  a->shard = shard, a->shards = shards, a->journal = journal, a->merge = merge, a->progress = progress;
  a->method = method;
}

static int l_sweep(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  luaL_checktype(L, 1, LUA_TTABLE);
  static const char *const known[] = {"H0", "V", "from", "to", "steps", "count", "threads", "series",
                                      "journal", "shard", "shards", "merge", "progress", "param",
                                      "param_unit", "energy_unit", "H", "method", NULL};
  lvsL_checkoptions(L, 1, known, "sweep", 1);
  lvs_matrix *h0, *v;
  family_ud fu = {L, 0, 0, 0};
  int family = sweep_model(L, &h0, &v, &fu);
  size_t n = lvs_matrix_rows(h0);
  sweep_args ar;
  sweep_run_args(L, family, h0, v, &ar);
  const char *pname = opt_string(L, "param"), *punit = opt_string(L, "param_unit"),
             *eunit = opt_string(L, "energy_unit");
  lsweep *u = lua_newuserdatauv(L, sizeof *u, 0);
  u->s = NULL;
  luaL_setmetatable(L, LVS_SWEEP_MT);
  progress_state ps = {0, 0, (size_t)-1};
  lvs_sweep_spec spec = {h0, v, ar.from, ar.to, (size_t)ar.steps, (size_t)ar.count, (int)ar.threads,
                         (int)ar.series, ar.journal, (size_t)ar.shard, (size_t)ar.shards, ar.merge,
                         ar.progress ? show_progress : NULL, &ps, NULL, NULL, ar.method};
  if (family) {
    fu.n = n;
    fu.cplx = lvs_matrix_is_complex(h0) || lvs_matrix_is_complex(v);
    spec.family = call_family;
    spec.family_ud = &fu;
  }
  int st = lvs_sweep_new(ctx, &spec, &u->s);
  if (ps.shown) fputc('\n', stderr);
  if (!st && (pname || punit || eunit)) st = lvs_sweep_set_labels(u->s, pname, punit, eunit);
  if (st == LVS_ENOTHERM || st == LVS_EDIM) {
    lua_pushstring(L, lvs_errmsg(ctx));
    lvs_clear_error(ctx);
    return luaL_argerror(L, 1, lua_tostring(L, -1));
  }
  lvsL_check(L, ctx, st, "sweep");
  return 1;
}

/* push the energies of tracked level #2 (1-based) from get(): a Lua array
 * over the points, or nil when get() has none (no series) */
static int push_curve(lua_State *L, const double *(*get)(const lvs_sweep *, size_t)) {
  lvs_sweep *s = checksweep(L, 1);
  lua_Integer k = luaL_checkinteger(L, 2);
  size_t count = lvs_sweep_count(s);
  if (k < 1 || (size_t)k > count) {
    lua_pushfstring(L, "level must be from 1 to %d, got %I", (int)count, k);
    return luaL_argerror(L, 2, lua_tostring(L, -1));
  }
  const double *e = get(s, (size_t)k - 1);
  if (!e) {
    lua_pushnil(L);
    return 1;
  }
  size_t np = lvs_sweep_points(s);
  lua_createtable(L, (int)np, 0);
  for (size_t i = 0; i < np; i++) {
    lua_pushnumber(L, e[i]);
    lua_rawseti(L, -2, (lua_Integer)i + 1);
  }
  return 1;
}

static int m_level(lua_State *L) { return push_curve(L, lvs_sweep_level); }

static int m_crossings(lua_State *L) {
  lvs_sweep *s = checksweep(L, 1);
  size_t nc = lvs_sweep_ncrossings(s);
  lua_createtable(L, (int)nc, 0);
  for (size_t c = 0; c < nc; c++) {
    const lvs_sweep_crossing *x = lvs_sweep_crossing_at(s, c);
    lua_createtable(L, 0, 4);
    lua_pushnumber(L, x->at);
    lua_setfield(L, -2, "at");
    lua_pushnumber(L, x->gap);
    lua_setfield(L, -2, "gap");
    lua_createtable(L, 2, 0);
    lua_pushinteger(L, (lua_Integer)x->i + 1);
    lua_rawseti(L, -2, 1);
    lua_pushinteger(L, (lua_Integer)x->j + 1);
    lua_rawseti(L, -2, 2);
    lua_setfield(L, -2, "levels");
    lua_pushstring(L, x->avoided ? "avoided" : "crossing");
    lua_setfield(L, -2, "kind");
    lua_rawseti(L, -2, (lua_Integer)c + 1);
  }
  return 1;
}

static int m_series(lua_State *L) { return push_curve(L, lvs_sweep_series); }

static int m_remove_journals(lua_State *L) {
  lvsL_may_write(L, "sweep", NULL); /* (the paths were checked by ls.sweep) */
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_sweep *s = checksweep(L, 1);
  lvsL_check(L, ctx, lvs_sweep_remove_journals(s), "sweep");
  return 0;
}

static int m_write(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  lvs_sweep *s = checksweep(L, 1);
  const char *path = luaL_checkstring(L, 2);
  lvsL_may_write(L, "sweep:write", path);
  int st = lvs_sweep_write(s, path);
  lvsL_check(L, ctx, st, "sweep:write");
  return 0;
}

static int m_about(lua_State *L) {
  lvs_sweep *s = checksweep(L, 1);
  char about[600];
  lvs_sweep_about(s, about, sizeof about);
  lua_pushstring(L, about);
  return 1;
}

static int m_index(lua_State *L) {
  lvs_sweep *s = checksweep(L, 1);
  const char *key = lua_tostring(L, 2);
  if (key && strcmp(key, "p") == 0) {
    size_t np = lvs_sweep_points(s);
    lua_createtable(L, (int)np, 0);
    for (size_t i = 0; i < np; i++) {
      lua_pushnumber(L, lvs_sweep_param(s, i));
      lua_rawseti(L, -2, (lua_Integer)i + 1);
    }
    return 1;
  }
  if (key && strcmp(key, "count") == 0) {
    lua_pushinteger(L, (lua_Integer)lvs_sweep_count(s));
    return 1;
  }
  if (key && strcmp(key, "series_order") == 0) {
    lua_pushinteger(L, lvs_sweep_series_order(s));
    return 1;
  }
  if (key && (strcmp(key, "partial") == 0 || strcmp(key, "done") == 0)) {
    size_t done = 0;
    int part = lvs_sweep_is_partial(s, &done);
    if (key[0] == 'p') lua_pushboolean(L, part);
    else lua_pushinteger(L, (lua_Integer)(part ? done : lvs_sweep_points(s)));
    return 1;
  }
  if (key && strcmp(key, "method") == 0) {
    int m = lvs_sweep_path(s);
    lua_pushstring(L, m == LVS_SWEEP_KRYLOV ? "krylov" : m == LVS_SWEEP_BAND ? "band" : "dense");
    return 1;
  }
  if (key && strcmp(key, "min_overlap") == 0) {
    lua_pushnumber(L, lvs_sweep_min_overlap(s));
    return 1;
  }
  lua_getmetatable(L, 1);
  lua_getfield(L, -1, "__methods");
  lua_pushvalue(L, 2);
  lua_rawget(L, -2);
  return 1;
}

static int m_gc(lua_State *L) {
  lsweep *u = luaL_checkudata(L, 1, LVS_SWEEP_MT);
  lvs_sweep_free(u->s);
  u->s = NULL;
  return 0;
}

static int m_tostring(lua_State *L) {
  lvs_sweep *s = checksweep(L, 1);
  size_t np = lvs_sweep_points(s);
  lua_pushfstring(L, "sweep: %d levels at %d points, p from %f to %f, %d crossings",
                  (int)lvs_sweep_count(s), (int)np, lvs_sweep_param(s, 0), lvs_sweep_param(s, np - 1),
                  (int)lvs_sweep_ncrossings(s));
  return 1;
}

void lvsL_open_sweep(lua_State *L, int ctxidx) {
  static const luaL_Reg methods[] = {
      {"level", m_level}, {"series", m_series}, {"crossings", m_crossings}, {"write", m_write},
      {"_remove_journals", m_remove_journals}, {"_about", m_about}, {NULL, NULL}};
  static const luaL_Reg meta[] = {
      {"__index", m_index}, {"__gc", m_gc}, {"__close", m_gc}, {"__tostring", m_tostring}, {NULL, NULL}};
  luaL_newmetatable(L, LVS_SWEEP_MT);
  lvsL_setfuncs(L, meta, ctxidx);
  lua_newtable(L);
  lvsL_setfuncs(L, methods, ctxidx);
  lua_pushvalue(L, -1);
  lua_setfield(L, -4, "_sweep_methods"); /* module table: the driver adds methods here */
  lua_setfield(L, -2, "__methods");
  lua_pop(L, 1);
  static const luaL_Reg fns[] = {{"sweep", l_sweep}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
}
