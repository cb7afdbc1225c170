/* lmodule.c -- luaopen_levelshift_core: the context, and each object's
 * functions. The context uses the Lua state's own allocator, so a memory cap
 * set on the state (embedding hosts) also bounds the core's allocations. */
#include <errno.h>
#include <stdio.h>
#include <math.h>
#include <limits.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include "bind/lbind.h"

int lvsL_gc_by_hand(lua_State *L);

/* The context userdata. The core allocates through the state's allocator,
 * wrapped here to count the net bytes it adds: Lua's collector sees only the
 * small userdata of a matrix, so without this dead matrices pile up between
 * cycles (a loop making 8 MB products grew to gigabytes). lvsL_gcstep turns
 * the count into collector work. */
typedef struct {
  lvs_ctx *ctx; /* first: lvsL_ctx reads it */
  lua_Alloc f;
  void *fud;
  long long grown; /* net bytes allocated by the core since the last step */
} ctx_ud;

static void *counting_alloc(void *ud, void *ptr, size_t osize, size_t nsize) {
  ctx_ud *u = ud;
  void *q = u->f(u->fud, ptr, osize, nsize);
  if (ptr == NULL) osize = 0;
  if (nsize == 0 || q) u->grown += (long long)nsize - (long long)osize;
  return q;
}

static int sandboxed(lua_State *L) {
  lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.sandbox");
  int s = lua_toboolean(L, -1);
  lua_pop(L, 1);
  return s;
}


/* 1 when dir (a resolved path) is root or inside it */
static int inside(const char *dir, const char *root) {
  size_t n = strlen(root);
  if (n > 1 && root[n - 1] == '/') n--;
  return !strncmp(dir, root, n) && (dir[n] == 0 || dir[n] == '/');
}

/* a ".." component anywhere in path */
static int has_dotdot(const char *p) {
  for (const char *s = p; (s = strstr(s, "..")) != NULL; s += 2)
    if ((s == p || s[-1] == '/') && (s[2] == 0 || s[2] == '/')) return 1;
  return 0;
}

int lvsL_may_write(lua_State *L, const char *fname, const char *path) {
  if (!sandboxed(L)) return 0;
  lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.write_dir");
  const char *root = lua_tostring(L, -1);
  if (!root) return luaL_error(L, "%s: writing files is disabled in this sandboxed host", fname);
  char root_copy[PATH_MAX];
  snprintf(root_copy, sizeof root_copy, "%s", root);
  lua_pop(L, 1);
  if (!path) return 0;
  size_t len = strlen(path);
  if (len == 0 || len >= PATH_MAX - 1) return luaL_error(L, "%s: the path is empty or too long", fname);
  if (has_dotdot(path)) return luaL_error(L, "%s: '%s' has a '..' component (not allowed in this sandboxed host)", fname, path);
  char dir[PATH_MAX], real[PATH_MAX];
  const char *slash = strrchr(path, '/');
  const char *base = slash ? slash + 1 : path;
  if (!*base || !strcmp(base, ".")) return luaL_error(L, "%s: '%s' names no file", fname, path);
  if (slash == path) snprintf(dir, sizeof dir, "/");
  else if (slash) snprintf(dir, sizeof dir, "%.*s", (int)(slash - path), path);
  else snprintf(dir, sizeof dir, ".");
  if (!realpath(dir, real) || !inside(real, root_copy))
    return luaL_error(L, "%s: '%s' is outside %s, the one directory this host lets scripts write to", fname, path,
                      root_copy);
  struct stat sb;
  if (lstat(path, &sb) == 0 && !S_ISREG(sb.st_mode))
    return luaL_error(L, "%s: '%s' exists and is not a regular file (a link or a directory)", fname, path);
  return 0;
}

int lvsL_may_read(lua_State *L, const char *path) {
  if (!sandboxed(L)) return 1;
  /* the folder holding the file, resolved (Debian's Lua modules are links
   * into other folders: /usr/share/lua/5.4/dkjson.lua -> ../5.1/) */
  char dir[PATH_MAX], real[PATH_MAX];
  const char *slash = strrchr(path, '/');
  struct stat sb;
  if (slash && slash != path) snprintf(dir, sizeof dir, "%.*s", (int)(slash - path), path);
  else snprintf(dir, sizeof dir, "%s", slash ? "/" : ".");
  if (stat(path, &sb) == 0 && S_ISDIR(sb.st_mode)) snprintf(dir, sizeof dir, "%s", path);
  if (!realpath(dir, real)) return 0;
  int ok = 0, top = lua_gettop(L);
  /* never code from the folder scripts write to, even when the host put it
   * on the module path too: a script would plant a module for later runs */
  if (lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.write_dir") == LUA_TSTRING && inside(real, lua_tostring(L, -1))) {
    lua_settop(L, top);
    return 0;
  }
  lua_settop(L, top);
  if (lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.read_roots") == LUA_TTABLE) {
    lua_Integer n = (lua_Integer)lua_rawlen(L, -1);
    for (lua_Integer k = 1; !ok && k <= n; k++) {
      if (lua_rawgeti(L, -1, k) == LUA_TSTRING) ok = inside(real, lua_tostring(L, -1));
      lua_pop(L, 1);
    }
  }
  lua_settop(L, top);
  return ok;
}

void lvsL_gcstep(lua_State *L) {
  lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.ctx");
  ctx_ud *u = lua_touserdata(L, -1);
  lua_pop(L, 1);
  if (u && u->grown > (1LL << 20)) {
    long long kb = u->grown >> 10;
    u->grown = 0;
    lua_gc(L, LUA_GCSTEP, kb > (1 << 30) ? (1 << 30) : (int)kb);
  }
}

static int ctx_gc(lua_State *L) {
  /* every object of the module uses the context: only the collector ends it */
  if (lvsL_gc_by_hand(L)) return luaL_error(L, "the levelshift context is freed by the collector only");
  lvs_ctx **p = lua_touserdata(L, 1);
  if (*p) {
    lvs_ctx_free(*p);
    *p = NULL;
  }
  return 0;
}

int lvsL_check(lua_State *L, lvs_ctx *ctx, int st, const char *fname) {
  if (st == LVS_OK) return 0;
  const char *msg = lvs_errmsg(ctx);
  size_t fl = strlen(fname);
  /* the core may already name the function ("transition: ..."): say it once */
  if (!strncmp(msg, fname, fl) && msg[fl] == ':' && msg[fl + 1] == ' ') msg += fl + 2;
  lua_pushfstring(L, "%s: %s", fname, msg);
  lvs_clear_error(ctx);
  return lua_error(L);
}

#define LVS_CTX_KEY "levelshift.ctx"

int lvsL_inside_binding(lua_State *L) {
  if (!lua_pushthread(L)) { /* not the main thread: the caller is out of sight */
    lua_pop(L, 1);
    return 1;
  }
  lua_pop(L, 1);
  lua_getfield(L, LUA_REGISTRYINDEX, LVS_CTX_KEY);
  int ctxud = lua_gettop(L), found = 0;
  lua_Debug ar;
  for (int level = 1; !found && lua_getstack(L, level, &ar); level++) {
    lua_getinfo(L, "f", &ar);
    if (lua_iscfunction(L, -1) && lua_getupvalue(L, -1, 1)) {
      found = lua_rawequal(L, -1, ctxud);
      lua_pop(L, 1);
    }
    lua_pop(L, 1);
  }
  lua_pop(L, 1);
  return found;
}

int lvsL_gc_by_hand(lua_State *L) {
  lua_Debug ar;
  if (!lua_getstack(L, 0, &ar) || !lua_getinfo(L, "n", &ar)) return 0;
  return !(ar.namewhat && strcmp(ar.namewhat, "metamethod") == 0 && ar.name && strcmp(ar.name, "__gc") == 0);
}

void lvsL_gc_guard(lua_State *L, const char *what) {
  if (lvsL_gc_by_hand(L) && lvsL_inside_binding(L))
    luaL_error(L, "__gc: the %s may be in use by a running levelshift function; drop it instead", what);
}

/* (the callback of B:potential and A:fn) */
int lvsL_real_fn(void *ud, size_t n, const double *x, double *fx) {
  lvsL_realcb *cb = ud;
  lua_State *L = cb->L;
  if (!lua_checkstack(L, 4)) {
    snprintf(cb->err, sizeof cb->err, "Lua stack overflow");
    cb->failed = 1;
    return 1;
  }
  for (size_t i = 0; i < n; i++) {
    lua_pushvalue(L, cb->fidx);
    lua_pushnumber(L, x[i]);
    if (lua_pcall(L, 1, 1, 0) != LUA_OK) {
      /* no conversions here: lua_tostring of a number could allocate */
      snprintf(cb->err, sizeof cb->err, "the function failed at x = %.17g: %s", x[i],
               lua_type(L, -1) == LUA_TSTRING ? lua_tostring(L, -1) : luaL_typename(L, -1));
      lua_pop(L, 1);
      cb->failed = 1;
      return 1;
    }
    if (lua_type(L, -1) != LUA_TNUMBER) {
      snprintf(cb->err, sizeof cb->err, "the function returned a %s at x = %.17g (number expected)",
               luaL_typename(L, -1), x[i]);
      lua_pop(L, 1);
      cb->failed = 1;
      return 1;
    }
    fx[i] = lua_tonumber(L, -1);
    lua_pop(L, 1);
    if (!isfinite(fx[i])) {
      snprintf(cb->err, sizeof cb->err, "the function returned %s at x = %.17g", isnan(fx[i]) ? "NaN" : "inf",
               x[i]);
      cb->failed = 1;
      return 1;
    }
  }
  return 0;
}


void lvsL_realcb_init(lvsL_realcb *cb, lua_State *L, int fidx) {
  cb->L = L;
  cb->fidx = fidx;
  cb->failed = 0;
  cb->err[0] = 0;
}

void lvsL_realcb_raise(lua_State *L, lvs_ctx *ctx, int st, const lvsL_realcb *cb, const char *fname) {
  if (st == LVS_OK || !cb->failed) return;
  lvs_clear_error(ctx);
  luaL_error(L, "%s: %s", fname, cb->err);
}

void lvsL_setfuncs(lua_State *L, const luaL_Reg *l, int ctxidx) {
  for (; l->name; l++) {
    lua_pushvalue(L, ctxidx);
    lua_pushcclosure(L, l->func, 1);
    lua_setfield(L, -2, l->name);
  }
}

lua_Integer lvsL_optfield_int(lua_State *L, int idx, const char *key, lua_Integer def,
                              const char *fname, int argn) {
  if (lua_isnoneornil(L, idx)) return def;
  lua_getfield(L, idx, key);
  lua_Integer v = def;
  if (!lua_isnil(L, -1)) {
    int ok;
    v = lua_tointegerx(L, -1, &ok);
    if (!ok) {
      lua_pushfstring(L, "option '%s' must be an integer", key);
      luaL_argerror(L, argn, lua_tostring(L, -1));
    }
  }
  lua_pop(L, 1);
  (void)fname;
  return v;
}

double lvsL_optfield_num(lua_State *L, int idx, const char *key, double def, const char *fname,
                         int argn) {
  if (lua_isnoneornil(L, idx)) return def;
  lua_getfield(L, idx, key);
  double v = def;
  if (!lua_isnil(L, -1)) {
    if (!lua_isnumber(L, -1)) {
      lua_pushfstring(L, "option '%s' must be a number", key);
      luaL_argerror(L, argn, lua_tostring(L, -1));
    }
    v = lua_tonumber(L, -1);
  }
  lua_pop(L, 1);
  (void)fname;
  return v;
}

void lvsL_checkoptions(lua_State *L, int idx, const char *const *known, const char *fname,
                       int argn) {
  if (lua_isnoneornil(L, idx)) return;
  luaL_checktype(L, idx, LUA_TTABLE);
  lua_pushnil(L);
  while (lua_next(L, idx)) {
    lua_pop(L, 1);
    int ok = 0;
    if (lua_type(L, -1) == LUA_TSTRING) {
      const char *k = lua_tostring(L, -1);
      for (const char *const *p = known; *p; p++)
        if (strcmp(*p, k) == 0) ok = 1;
    }
    if (!ok) {
      const char *key = luaL_tolstring(L, -1, NULL);
      lua_pushfstring(L, "unknown option '%s' (accepted:", key);
      for (const char *const *p = known; *p; p++) {
        lua_pushfstring(L, " %s", *p);
        lua_concat(L, 2);
      }
      lua_pushliteral(L, ")");
      lua_concat(L, 2);
      (void)fname;
      luaL_argerror(L, argn, lua_tostring(L, -1));
    }
  }
}

/* ls.clock() -> wall-clock seconds (monotonic), for benchmarks */
static int l_clock(lua_State *L) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  lua_pushnumber(L, (lua_Number)ts.tv_sec + 1e-9 * (lua_Number)ts.tv_nsec);
  return 1;
}

/* ls.linalg() -> {lapacke = name, cblas = name, blas_threads = n}: opens
 * LAPACK and BLAS now (otherwise opened on first use) and tells which */
static int l_linalg(lua_State *L) {
  luaL_argcheck(L, lua_isnone(L, 1), 1, "ls.linalg takes no arguments");
  const char *lapacke = NULL, *cblas = NULL;
  int threads = 0;
  lvs_linalg(&lapacke, &cblas, &threads);
  lua_createtable(L, 0, 3);
  lua_pushstring(L, lapacke);
  lua_setfield(L, -2, "lapacke");
  lua_pushstring(L, cblas);
  lua_setfield(L, -2, "cblas");
  lua_pushinteger(L, threads);
  lua_setfield(L, -2, "blas_threads");
  return 1;
}

static int l_version(lua_State *L) {
  lua_pushstring(L, lvs_version());
  return 1;
}

static int l_config(lua_State *L) {
  lvs_ctx *ctx = lvsL_ctx(L);
  static const char *const known[] = {"dense_cap", NULL};
  lvsL_checkoptions(L, 1, known, "config", 1);
  if (!lua_isnoneornil(L, 1)) {
    lua_getfield(L, 1, "dense_cap");
    if (!lua_isnil(L, -1)) {
      lua_Number v = lua_tonumber(L, -1);
      luaL_argcheck(L, lua_isnumber(L, -1) && v > 0, 1, "dense_cap must be a positive number of bytes");
      luaL_argcheck(L, v <= 0x1p62, 1, "dense_cap must be finite and at most 2^62 bytes");
      lvs_ctx_set_dense_cap(ctx, (size_t)v);
    }
    lua_pop(L, 1);
  }
  lua_createtable(L, 0, 1);
  lua_pushnumber(L, (lua_Number)lvs_ctx_dense_cap(ctx));
  lua_setfield(L, -2, "dense_cap");
  return 1;
}

/* The state's one context: made on the first load, kept in the registry
 * until the state closes, and reused when the module is loaded again
 * (package.loaded cleared and required anew): a second context would end,
 * with the first module table, under objects still using it, and calls of
 * the old module's functions would escape lvsL_inside_binding's guard. A
 * host's work fence (registry "levelshift.fence", a light userdata) is set
 * on it. Leaves the context userdata on the stack. */
static lvs_ctx *state_ctx(lua_State *L) {
  if (lua_getfield(L, LUA_REGISTRYINDEX, LVS_CTX_KEY) == LUA_TUSERDATA) {
    ctx_ud *old = lua_touserdata(L, -1);
    if (old && old->ctx) return old->ctx;
  }
  lua_pop(L, 1);
  void *ud;
  lua_Alloc f = lua_getallocf(L, &ud);
  ctx_ud *cu = lua_newuserdatauv(L, sizeof *cu, 0);
  cu->ctx = NULL, cu->f = f, cu->fud = ud, cu->grown = 0;
  lvs_ctx **p = &cu->ctx;
  lua_createtable(L, 0, 1);
  lua_pushcfunction(L, ctx_gc);
  lua_setfield(L, -2, "__gc");
  lua_setmetatable(L, -2);
  *p = lvs_ctx_new((lvs_alloc_fn)counting_alloc, cu);
  if (!*p) luaL_error(L, "levelshift: cannot allocate a context");
  if (lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.fence") == LUA_TLIGHTUSERDATA)
    lvs_ctx_set_fence(*p, lua_touserdata(L, -1));
  lua_pop(L, 1);
  lua_pushvalue(L, -1);
  lua_setfield(L, LUA_REGISTRYINDEX, LVS_CTX_KEY); /* for lvsL_inside_binding */
  return *p;
}

__attribute__((visibility("default"))) int luaopen_levelshift_core(lua_State *L) {
  state_ctx(L);
  int ctxidx = lua_gettop(L);
  lua_newtable(L);
  static const luaL_Reg fns[] = {{"version", l_version}, {"config", l_config}, {"clock", l_clock},
                                  {"linalg", l_linalg}, {NULL, NULL}};
  lvsL_setfuncs(L, fns, ctxidx);
  lvsL_open_matrix(L, ctxidx);
  lvsL_open_basis(L, ctxidx);
  lvsL_open_eigen(L, ctxidx);
  lvsL_open_sweep(L, ctxidx);
  lvsL_open_effective(L, ctxidx);
  lvsL_open_series(L, ctxidx);
  lvsL_open_transition(L, ctxidx);
  lvsL_open_files(L, ctxidx);
  lvsL_open_coulomb(L, ctxidx);
  lvsL_open_box(L, ctxidx);
  lvsL_open_rotor(L, ctxidx);
  lvsL_open_charge(L, ctxidx);
  lvsL_open_opfun(L, ctxidx);
  lvsL_open_polar(L, ctxidx);
  lvsL_open_radial(L, ctxidx);
  lvsL_open_solve_series(L, ctxidx);
  lvsL_open_units(L, ctxidx);
  lvsL_open_random(L, ctxidx);
  /* @@FEATURE-OPEN-CALLS@@ */
  lua_pushvalue(L, ctxidx);
  lua_setfield(L, -2, "_ctx"); /* keeps the context alive with the module */
  return 1;
}
