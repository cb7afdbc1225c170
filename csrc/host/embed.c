/* embed.c -- the embedding API: a Lua state with levelshift preloaded.
 * Search order for the Lua sugar and recipes: directories added with
 * lvs_host_add_path, LVS_PATH from the environment, then either the source
 * tree (when this library runs from the build tree it was built in) or the
 * installed Lua directory found next to this library (an install moved with
 * `cmake --install --prefix OTHER`), then the configured install prefix. */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <limits.h>
#include <lauxlib.h>
#include <lua.h>
#include <lualib.h>
#include <stdio.h>
#include <stdlib.h>
#include <math.h>
#include <string.h>
#include <sys/stat.h>
#include "bind/lbind.h"
#include "levelshift.h"

LUALIB_API int luaopen_levelshift_core(lua_State *L);

struct lvs_host {
  lua_State *L;
  char *err;
  size_t used, cap;                /* bytes through the allocator, cap (0 = none) */
  unsigned long long budget, spent; /* instruction budget per run (0 = none) */
  double deadline;                  /* seconds per run (0 = none) */
  lvs_fence fence;                  /* the core polls it (registry "levelshift.fence") */
  int flags;
};

#define HOOK_STEP 1000

/* Allocator that counts bytes and refuses to pass the cap; the core's
 * context takes the state's allocator, so the cap bounds both. */
static void *capped_alloc(void *ud, void *ptr, size_t osize, size_t nsize) {
  lvs_host *h = ud;
  if (ptr == NULL) osize = 0;
  if (nsize == 0) {
    free(ptr);
    h->used -= osize;
    return NULL;
  }
  if (h->cap && nsize > osize && h->used + (nsize - osize) > h->cap) return NULL;
  void *p = realloc(ptr, nsize);
  if (p) h->used = h->used - osize + nsize;
  return p;
}

static int panic(lua_State *L) {
  fprintf(stderr, "levelshift: unprotected error: %s\n", lua_tostring(L, -1));
  return 0;
}

/* the fences of a run, charged `cost` instructions: raises when one is
 * passed (and makes the hook raise at every instruction from then on, so a
 * pcall that catches the error cannot go on) */
static void fence_check(lua_State *L, lvs_host *h, unsigned long long cost) {
  h->spent += cost;
  char msg[96];
  if (h->fence.interrupt) snprintf(msg, sizeof msg, "interrupted by the host");
  else if (h->fence.deadline > 0 && lvs_monotonic() >= h->fence.deadline)
    snprintf(msg, sizeof msg, "deadline of %g s exceeded", h->deadline);
  else if (h->budget && h->spent > h->budget)
    snprintf(msg, sizeof msg, "instruction budget of %llu exhausted", h->budget);
  else return;
  lua_sethook(L, lua_gethook(L), LUA_MASKCOUNT, 1); /* keep raising if caught */
  luaL_error(L, "%s", msg);
}

static void count_hook(lua_State *L, lua_Debug *ar) {
  (void)ar;
  fence_check(L, *(lvs_host **)lua_getextraspace(L), HOOK_STEP);
}

/* charged on every coroutine resume: the hook counts per coroutine, from
 * zero, so 10,000 coroutines of 999 instructions each never reached it */
static int charge_resume(lua_State *L) {
  fence_check(L, *(lvs_host **)lua_getextraspace(L), HOOK_STEP);
  return 0;
}

void lvs_host_interrupt(lvs_host *h) {
  if (h) h->fence.interrupt = 1;
}

static void set_err(lvs_host *h, const char *msg) {
  free(h->err);
  h->err = msg ? strdup(msg) : NULL;
}

static int traceback(lua_State *L) {
  const char *msg = lua_tostring(L, 1);
  if (msg == NULL) {
    if (luaL_callmeta(L, 1, "__tostring") && lua_type(L, -1) == LUA_TSTRING) return 1;
    msg = lua_pushfstring(L, "(error object is a %s value)", luaL_typename(L, 1));
  }
  luaL_traceback(L, L, msg, 1);
  return 1;
}

static void prepend_path(lua_State *L, const char *dir) {
  lua_getglobal(L, "package");
  lua_getfield(L, -1, "path");
  lua_pushfstring(L, "%s/lua/?.lua;%s/lua/?/init.lua;%s/?.lua;%s/?/init.lua;%s", dir, dir, dir, dir,
                  lua_tostring(L, -1));
  lua_setfield(L, -3, "path");
  lua_pop(L, 2);
}

/* Where this library runs from: inside the build tree it was built in,
 * return 0 (use the source tree); installed, write the Lua directory of that
 * install (LVS_REL_LUA relative to the library's folder) and return 1. */
static int own_lua_dir(char *out, size_t len) {
  Dl_info di;
  if (!dladdr((void *)lvs_host_new, &di) || !di.dli_fname) return 0;
  char *real = realpath(di.dli_fname, NULL);
  if (!real) return 0;
  size_t bl = strlen(LVS_BINARY_DIR);
  int in_build = !strncmp(real, LVS_BINARY_DIR, bl) && real[bl] == '/';
  char *slash = strrchr(real, '/');
  int ok = 0;
  if (!in_build && slash) {
    *slash = 0;
    ok = snprintf(out, len, "%s/%s", real, LVS_REL_LUA) < (int)len;
  }
  free(real);
  return ok;
}

static void add_root(lua_State *L, const char *dir);

/* the module path as the host set it (put back before each sandboxed run) */
static void keep_host_path(lua_State *L) {
  lua_getglobal(L, LUA_LOADLIBNAME);
  lua_getfield(L, -1, "path");
  lua_setfield(L, LUA_REGISTRYINDEX, "levelshift.host_path");
  lua_pop(L, 1);
}

static int add_path_protected(lua_State *L) {
  const char *dir = lua_touserdata(L, 1);
  prepend_path(L, dir);
  add_root(L, dir); /* a sandbox reads from it too */
  keep_host_path(L);
  return 0;
}

int lvs_host_add_path(lvs_host *h, const char *dir) {
  if (!h || !dir) return 1;
  lua_pushcfunction(h->L, add_path_protected);
  lua_pushlightuserdata(h->L, (void *)dir);
  if (lua_pcall(h->L, 1, 0, 0) != LUA_OK) {
    lua_pop(h->L, 1);
    return 1;
  }
  return 0;
}

/* package.searchers[2] of a sandbox: the stock Lua-file searcher reads
 * precompiled chunks too, and mutated bytecode crashed the interpreter;
 * this one loads text chunks only (mode "t") and is otherwise the same
 * (package.searchpath on package.path, the file name as the loader's extra
 * value). */
static int searcher_text(lua_State *L) {
  const char *name = luaL_checkstring(L, 1);
  lua_getglobal(L, "package");
  if (!lua_istable(L, -1)) return luaL_error(L, "module '%s': no package table", name);
  lua_getfield(L, -1, "searchpath");
  lua_pushvalue(L, 1);
  lua_getfield(L, -3, "path");
  lua_call(L, 2, 2); /* file name, or nil and a message */
  if (lua_isnil(L, -2)) {
    lua_pushfstring(L, "\n\t%s", luaL_optstring(L, -1, ""));
    return 1;
  }
  const char *file = lua_tostring(L, -2);
  if (!lvsL_may_read(L, file)) {
    lua_pushfstring(L, "\n\tno file in this host's folders for '%s'", name);
    return 1;
  }
  if (luaL_loadfilex(L, file, "t") != LUA_OK)
    return luaL_error(L, "error loading module '%s' from file '%s':\n\t%s", name, file, lua_tostring(L, -1));
  lua_pushstring(L, file);
  return 2;
}

/* Under an instruction budget two kinds of Lua code ran with the count
 * hook off: a message handler of xpcall that Lua calls for an error raised
 * by the hook itself (it runs inside the hook, where hooks are disabled:
 * `xpcall(loop, loop)` hung the host), and __gc finalizers (Lua turns
 * hooks off for them: 11 s under a 2e6 budget). So with a budget, xpcall
 * calls its handler after the stack has unwound (where the budget counts),
 * and never for the budget's own stop, and setmetatable refuses a
 * metatable with __gc (only a __gc present at setmetatable time makes an
 * object finalizable). */
static const char *const budget_lua =
    "local charge = ...\n"
    "local rawpcall, rawsetmt, pack, unpack = pcall, setmetatable, table.pack, table.unpack\n"
    "local function stop(e)\n"
    "  return type(e) == 'string' and (e:find('instruction budget of %d+ exhausted') or\n"
    "    e:find('deadline of [^ ]+ s exceeded') or e:find('interrupted by the host', 1, true))\n"
    "end\n"
    "xpcall = function(f, msgh, ...)\n"
    "  local r = pack(rawpcall(f, ...))\n"
    "  if r[1] then return unpack(r, 1, r.n) end\n"
    "  if stop(r[2]) then error(r[2], 0) end\n"
    "  return false, msgh(r[2])\n"
    "end\n"
    "setmetatable = function(t, mt)\n"
    "  if type(mt) == 'table' and rawget(mt, '__gc') ~= nil then\n"
    "    error('setmetatable: __gc metamethods are disabled under an instruction budget or a deadline', 2)\n"
    "  end\n"
    "  return rawsetmt(t, mt)\n"
    "end\n"
    "if coroutine then\n"
    "  local create, resume, close, status = coroutine.create, coroutine.resume, coroutine.close, coroutine.status\n"
    "  coroutine.resume = function(co, ...) charge() return resume(co, ...) end\n"
    "  coroutine.wrap = function(f)\n"
    "    local co = create(f)\n"
    "    return function(...)\n"
    "      charge()\n"
    "      local r = pack(resume(co, ...))\n"
    "      if r[1] then return unpack(r, 2, r.n) end\n"
    "      if status(co) == 'dead' then close(co) end\n"
    "      error(r[2], 0)\n"
    "    end\n"
    "  end\n"
    "end\n";

static const char *const sandbox_lua =
    "local rawload = load\n"
    "load = function(chunk, name, mode, env) return rawload(chunk, name, 't', env) end\n"
    "dofile, loadfile = nil, nil\n"
    "package.loadlib, package.cpath = nil, ''\n"
    "package.searchers[4], package.searchers[3] = nil, nil\n";

lvs_host *lvs_host_new(int flags) {
  lvs_host_opts o = {flags, 0, 0, NULL, 0};
  return lvs_host_new_ex(&o);
}

size_t lvs_host_memory(const lvs_host *h) { return h ? h->used : 0; }

/* the roots a sandbox reads from: every directory put on the module path */
static void add_root(lua_State *L, const char *dir) {
  char real[PATH_MAX];
  if (!realpath(dir, real)) return;
  luaL_getsubtable(L, LUA_REGISTRYINDEX, "levelshift.read_roots");
  lua_pushstring(L, real);
  lua_rawseti(L, -2, (lua_Integer)lua_rawlen(L, -2) + 1);
  lua_pop(L, 1);
}

/* package.searchpath of a sandbox: only files inside the host's folders
 * (the stock one tells whether any file on the machine exists) */
static int searchpath_sandbox(lua_State *L) {
  int top = lua_gettop(L);
  lua_pushvalue(L, lua_upvalueindex(1));
  lua_insert(L, 1);
  lua_call(L, top, 2);
  if (lua_isstring(L, -2) && !lvsL_may_read(L, lua_tostring(L, -2))) {
    lua_pushnil(L);
    lua_pushfstring(L, "\n\tno file in this host's folders for '%s'", luaL_optstring(L, 1, "?"));
    return 2;
  }
  return 2;
}

static int run_chunk(lua_State *L, const char *code, const char *name, int nargs);

/* Each run of a sandbox starts from the library and the standard tables as
 * the host set them up: the snapshot (made after set-up) and the function
 * that puts it back before every run (registry "levelshift.restore"). A
 * script's changes to ls, to its modules and method tables, to the
 * library's metatables, to string/table/math/coroutine/utf8/package and to
 * the globals that existed at set-up do not reach the next run; globals it
 * adds stay (a host may run a set-up script first). */
static const char *const snapshot_lua =
    "local tabs, forcemt, cap = ...\n"
    "local next, rawset = next, rawset\n"
    "local snaps, mts = {}, {}\n"
    "for i, t in ipairs(tabs) do\n"
    "  local s = {}\n"
    "  for k, v in next, t do s[k] = v end\n"
    "  snaps[i], mts[i] = s, getmetatable(t)\n"
    "end\n"
    "local G = {}\n"
    "for k, v in next, _G do G[k] = v end\n"
    "local config = G.ls and G.ls.config\n"
    "return function()\n"
    "  for i, t in ipairs(tabs) do\n"
    "    local s = snaps[i]\n"
    "    forcemt(t, mts[i])\n"
    "    for k in next, t do if s[k] == nil then rawset(t, k, nil) end end\n"
    "    for k, v in next, s do rawset(t, k, v) end\n"
    "  end\n"
    "  forcemt(_G, nil)\n"
    "  for k, v in next, G do rawset(_G, k, v) end\n"
    "  if config and cap then config{dense_cap = cap} end\n"
    "end\n";

static int force_setmetatable(lua_State *L) {
  luaL_checktype(L, 1, LUA_TTABLE);
  lua_settop(L, 2);
  lua_setmetatable(L, 1);
  return 0;
}

/* the tables the snapshot keeps, as a list on the stack */
static void snapshot_tables(lua_State *L) {
  lua_newtable(L);
  int list = lua_gettop(L);
  lua_Integer n = 0;
  static const char *const std[] = {LUA_STRLIBNAME, LUA_TABLIBNAME, LUA_MATHLIBNAME, LUA_COLIBNAME,
                                    LUA_UTF8LIBNAME, LUA_LOADLIBNAME, NULL};
  for (const char *const *k = std; *k; k++)
    if (lua_getglobal(L, *k) == LUA_TTABLE) lua_rawseti(L, list, ++n);
    else lua_pop(L, 1);
  lua_getglobal(L, LUA_LOADLIBNAME);
  if (lua_getfield(L, -1, "searchers") == LUA_TTABLE) lua_rawseti(L, list, ++n);
  else lua_pop(L, 1);
  if (lua_getfield(L, -1, "loaded") == LUA_TTABLE) {
    lua_pushvalue(L, -1);
    lua_rawseti(L, list, ++n);
    for (lua_pushnil(L); lua_next(L, -2);) { /* the library's modules and their method tables */
      if (lua_type(L, -2) == LUA_TSTRING && !strncmp(lua_tostring(L, -2), "levelshift", 10) &&
          lua_type(L, -1) == LUA_TTABLE) {
        lua_pushvalue(L, -1);
        lua_rawseti(L, list, ++n);
        static const char *const sub[] = {"_matrix_methods", "_basis_methods", NULL};
        for (const char *const *k = sub; *k; k++)
          if (lua_getfield(L, -1, *k) == LUA_TTABLE) lua_rawseti(L, list, ++n);
          else lua_pop(L, 1);
      }
      lua_pop(L, 1);
    }
  }
  lua_pop(L, 2);
  for (lua_pushnil(L); lua_next(L, LUA_REGISTRYINDEX);) { /* the library's metatables */
    if (lua_type(L, -2) == LUA_TSTRING && !strncmp(lua_tostring(L, -2), "levelshift.", 11) &&
        lua_type(L, -1) == LUA_TTABLE && strcmp(lua_tostring(L, -2), "levelshift.read_roots") != 0) {
      lua_pushvalue(L, -1);
      lua_rawseti(L, list, ++n);
    }
    lua_pop(L, 1);
  }
}

/* everything that can raise (out of memory under a small cap), run
 * protected by lvs_host_new_ex: a failure frees the host */
static int host_setup(lua_State *L) {
  lvs_host *h = lua_touserdata(L, 1);
  const char *wdir = lua_tostring(L, 2);
  int flags = h->flags;
  if (flags & LVS_HOST_SANDBOX) {
    static const luaL_Reg safe[] = {{LUA_GNAME, luaopen_base}, {LUA_LOADLIBNAME, luaopen_package},
                                    {LUA_COLIBNAME, luaopen_coroutine}, {LUA_TABLIBNAME, luaopen_table},
                                    {LUA_STRLIBNAME, luaopen_string}, {LUA_MATHLIBNAME, luaopen_math},
                                    {LUA_UTF8LIBNAME, luaopen_utf8}, {NULL, NULL}};
    for (const luaL_Reg *r = safe; r->func; r++) {
      luaL_requiref(L, r->name, r->func, 1);
      lua_pop(L, 1);
    }
    lua_getglobal(L, LUA_LOADLIBNAME); /* text chunks only through require */
    lua_getfield(L, -1, "searchers");
    lua_pushcfunction(L, searcher_text);
    lua_rawseti(L, -2, 2);
    lua_pop(L, 1);
    lua_getfield(L, -1, "searchpath"); /* no probing of the file system */
    lua_pushcclosure(L, searchpath_sandbox, 1);
    lua_setfield(L, -2, "searchpath");
    lua_pop(L, 1);
    lua_getglobal(L, LUA_STRLIBNAME); /* no bytecode out of functions either */
    lua_pushnil(L);
    lua_setfield(L, -2, "dump");
    lua_pop(L, 1);
    lua_pushboolean(L, 1); /* the module's writers and readers ask (lvsL_may_write) */
    lua_setfield(L, LUA_REGISTRYINDEX, "levelshift.sandbox");
    if (wdir) {
      lua_pushstring(L, wdir);
      lua_setfield(L, LUA_REGISTRYINDEX, "levelshift.write_dir");
    }
  } else {
    luaL_openlibs(L);
  }
  /* Lua's own module folders (absolute ones: not "./"): Lua files only
   * (no C modules in a sandbox), read-only libraries such as dkjson */
  lua_getglobal(L, LUA_LOADLIBNAME);
  lua_getfield(L, -1, "path");
  const char *pp = lua_tostring(L, -1);
  for (const char *t = pp; t && *t;) {
    const char *e = strchr(t, ';'), *q = strchr(t, '?');
    size_t len = e ? (size_t)(e - t) : strlen(t);
    if (*t == '/' && q && q < t + len) {
      char dir[PATH_MAX];
      snprintf(dir, sizeof dir, "%.*s", (int)(q - t), t);
      add_root(L, dir);
    }
    t += len + (e ? 1 : 0);
  }
  lua_pop(L, 2);
  /* configured install prefix last, then the source tree or the install
   * found next to this library, then LVS_PATH first */
  prepend_path(L, LVS_INSTALL_LUA);
  add_root(L, LVS_INSTALL_LUA);
  char own[PATH_MAX];
  if (own_lua_dir(own, sizeof own)) prepend_path(L, own), add_root(L, own);
  else prepend_path(L, LVS_SOURCE_DIR), add_root(L, LVS_SOURCE_DIR);
  const char *env = getenv("LVS_PATH");
  if (env && *env) prepend_path(L, env), add_root(L, env);
  lua_pushlightuserdata(L, &h->fence); /* the core's context polls it */
  lua_setfield(L, LUA_REGISTRYINDEX, "levelshift.fence");
  luaL_getsubtable(L, LUA_REGISTRYINDEX, LUA_PRELOAD_TABLE);
  lua_pushcfunction(L, luaopen_levelshift_core);
  lua_setfield(L, -2, "levelshift.core");
  lua_pop(L, 1);
  if ((flags & LVS_HOST_SANDBOX) && run_chunk(L, sandbox_lua, "=sandbox", 0)) return lua_error(L);
  if (h->budget || h->deadline > 0 || (flags & LVS_HOST_SANDBOX)) {
    lua_pushcfunction(L, charge_resume);
    if (run_chunk(L, budget_lua, "=budget", 1)) return lua_error(L);
  }
  if ((flags & LVS_HOST_GLOBAL) && run_chunk(L, "ls = require 'levelshift'", "=init", 0)) return lua_error(L);
  if (flags & LVS_HOST_SANDBOX) {
    /* the sugar modules load on first use: load them all now, so that the
     * snapshot holds the whole library */
    if (run_chunk(L, "if ls then for _ in pairs(ls) do end end", "=load", 0)) return lua_error(L);
    if (luaL_loadbuffer(L, snapshot_lua, strlen(snapshot_lua), "=snapshot")) return lua_error(L);
    snapshot_tables(L);
    lua_pushcfunction(L, force_setmetatable);
    if (flags & LVS_HOST_GLOBAL) {
      lua_getglobal(L, "ls");
      lua_getfield(L, -1, "config");
      lua_call(L, 0, 1);
      lua_getfield(L, -1, "dense_cap");
      lua_replace(L, -3);
      lua_pop(L, 1);
    } else {
      lua_pushnil(L);
    }
    lua_call(L, 3, 1);
    lua_setfield(L, LUA_REGISTRYINDEX, "levelshift.restore");
    keep_host_path(L);
  }
  return 0;
}

/* registry "levelshift.restore", then package.path as the host set it */
static int restore_sandbox(lua_State *L) {
  lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.restore");
  lua_call(L, 0, 0);
  lua_getglobal(L, LUA_LOADLIBNAME);
  lua_getfield(L, LUA_REGISTRYINDEX, "levelshift.host_path");
  lua_setfield(L, -2, "path");
  return 0;
}

/* load and call code with the nargs values below it as arguments; 0 or
 * nonzero with the message on the stack */
static int run_chunk(lua_State *L, const char *code, const char *name, int nargs) {
  if (luaL_loadbuffer(L, code, strlen(code), name)) return 1;
  lua_insert(L, -1 - nargs);
  return lua_pcall(L, nargs, 0, 0) != LUA_OK;
}

lvs_host *lvs_host_new_ex(const lvs_host_opts *opts) {
  lvs_host_opts o = {0, 0, 0, NULL, 0};
  if (opts) o = *opts;
  if (!(o.deadline >= 0) || !isfinite(o.deadline)) return NULL; /* NaN, negative, infinite */
  char wdir[PATH_MAX];
  if (o.write_dir) {
    struct stat sb;
    if (!realpath(o.write_dir, wdir) || stat(wdir, &sb) != 0 || !S_ISDIR(sb.st_mode)) return NULL;
  }
  lvs_host *h = calloc(1, sizeof *h);
  if (!h) return NULL;
  h->flags = o.flags;
  h->cap = o.memory_cap;
  h->budget = o.instruction_budget;
  h->deadline = o.deadline;
  h->L = lua_newstate(capped_alloc, h);
  if (!h->L) {
    free(h);
    return NULL;
  }
  lua_State *L = h->L;
  lua_atpanic(L, panic);
  *(lvs_host **)lua_getextraspace(L) = h;
  /* pushing a C function and a light userdata allocates nothing */
  lua_pushcfunction(L, host_setup);
  lua_pushlightuserdata(L, h);
  int ok = lua_checkstack(L, 2);
  if (ok && o.write_dir) ok = lua_pushstring(L, wdir) != NULL; /* may raise: checked below */
  else if (ok) lua_pushnil(L);
  if (!ok || lua_pcall(L, 2, 0, 0) != LUA_OK) {
    if (getenv("LVS_DEBUG_HOST")) fprintf(stderr, "levelshift: host set-up failed: %s\n", lua_tostring(L, -1));
    lvs_host_free(h);
    return NULL;
  }
  return h;
}

void lvs_host_free(lvs_host *h) {
  if (!h) return;
  if (h->L) lua_close(h->L);
  free(h->err);
  free(h);
}

static int run(lvs_host *h, int status) {
  lua_State *L = h->L;
  h->spent = 0;
  h->fence.interrupt = 0;
  h->fence.seconds = h->deadline;
  h->fence.deadline = h->deadline > 0 ? lvs_monotonic() + h->deadline : 0;
  lua_sethook(L, count_hook, LUA_MASKCOUNT, HOOK_STEP); /* budget, deadline, interrupt */
  if (status == LUA_OK && (h->flags & LVS_HOST_SANDBOX)) {
    lua_pushcfunction(L, restore_sandbox); /* the sandbox as the host set it up */
    status = lua_pcall(L, 0, 0, 0);
    if (status != LUA_OK) lua_remove(L, -2); /* the chunk; the message stays */
  }
  if (status == LUA_OK) {
    lua_pushcfunction(L, traceback);
    lua_insert(L, -2);
    status = lua_pcall(L, 0, 0, -2);
  }
  lua_sethook(L, NULL, 0, 0);
  h->fence.deadline = 0;
  h->fence.interrupt = 0;
  if (status != LUA_OK) {
    set_err(h, lua_tostring(L, -1) ? lua_tostring(L, -1) : "(error object is not a string)");
    lua_settop(L, 0);
    return 1;
  }
  lua_settop(L, 0);
  set_err(h, NULL);
  return 0;
}

int lvs_host_dofile(lvs_host *h, const char *path) {
  if (!h) return 1;
  return run(h, luaL_loadfile(h->L, path));
}

int lvs_host_dostring(lvs_host *h, const char *code, const char *name) {
  if (!h || !code) return 1;
  return run(h, luaL_loadbuffer(h->L, code, strlen(code), name ? name : "=(string)"));
}

const char *lvs_host_error(const lvs_host *h) { return (h && h->err) ? h->err : ""; }
void *lvs_host_state(lvs_host *h) { return h ? h->L : NULL; }
