/* main.c -- the `levelshift` program: one embedding of the library.
 *
 *   levelshift FILE.lua [name=value ...]   run a script; the pairs reach it
 *                                          as a table (its `...` and the
 *                                          global `params`), numbers parsed
 *   levelshift -e CODE [name=value ...]    run a string
 *   levelshift FILE.lua --shard K/N ...    compute shard K of N of each
 *                                          ls.sweep with out= (also from
 *                                          SLURM_ARRAY_TASK_ID/_COUNT/_MIN)
 *   levelshift FILE.lua --merge ...        join the shards' part files
 *   levelshift --help | --version
 *
 * A Lua error prints "levelshift: message" and a traceback on stderr and
 * exits with status 1. */
#include <lauxlib.h>
#include <lua.h>
#include <lualib.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "levelshift.h"
#if defined(__GLIBC__)
#include <malloc.h>
#include <stdint.h>
#include <sys/mman.h>
#include <unistd.h>
#endif

/* Large models churn through arrays of a few MB (grids of 1e5 points,
 * sparse operators): on virtual machines every first touch of a 4 KiB page
 * costs a trap. So the program (not the library: embedders keep their own
 * policy) keeps freed memory in the heap instead of returning it, and asks
 * for transparent huge pages on the first 128 MiB of heap. Pages are only
 * committed when touched. LVS_NO_TUNE=1 in the environment turns this off
 * (to measure what it brings: docs/benchmarks.md). */
static void tune_memory(void) {
#if defined(__GLIBC__) && defined(MADV_HUGEPAGE)
  /* blocks up to 1 GiB come from the heap and are reused when freed (an
   * mmap'd block comes back as fresh pages the kernel must zero: a
   * 2^20-state chain build spent half its time in clear_page with 256 MiB
   * here, 3.2-4.1 s against 2.8-3.6 s with 1 GiB and more) */
  mallopt(M_MMAP_THRESHOLD, 1 << 30);
  mallopt(M_TRIM_THRESHOLD, 1 << 30);
  const uintptr_t huge = (uintptr_t)2 << 20;
  /* The heap starts at a random offset inside a 2 MiB region (address space
   * layout randomization), and a huge page can only back a whole aligned
   * 2 MiB that nothing has touched before the advice. So: fill the heap up
   * to the next boundary B with blocks that are kept (never freed, never
   * touched), so that the 128 MiB block starts exactly at B with its header
   * just below it; advise from B on; free the block. Small allocations then
   * start at B and share one huge page instead of faulting in 4 KiB pages
   * below B, a number that varied with the random offset (the bimodal
   * timings of small jobs). The filler costs address space only. Relies on
   * glibc carving fresh blocks from the top of the heap in order (a block
   * of n bytes spans (n + 8) rounded up to 16); if that does not hold, the
   * advice starts at the first boundary past the block instead. */
  /* volatile: the compiler may not drop these allocations as unused */
  static void *volatile filler[2]; /* reachable for the life of the process */
  filler[0] = malloc(64);
  if (filler[0]) {
    uintptr_t next = (uintptr_t)filler[0] + 80; /* the next block's address */
    uintptr_t b = (next + huge - 1) & ~(huge - 1);
    if (b - next < 64) b += huge;
    filler[1] = malloc(b - next - 8);
  }
  void *p = malloc(128u << 20); /* grows the heap (virtual memory only) */
  if (!p) return;
  uintptr_t lo = (uintptr_t)p;
  if (lo & (huge - 1)) lo = (lo + huge - 1) & ~(huge - 1);
  uintptr_t hi = (uintptr_t)sbrk(0) & ~(huge - 1);
  if (hi > lo) madvise((void *)lo, hi - lo, MADV_HUGEPAGE);
  free(p);
#endif
}

/* Past those 128 MiB the heap grows in 4 KiB pages, and on this kind of
 * virtual machine each first touch traps into the hypervisor: a 2^18-state
 * spin chain (430 MB of operators) took 75000 page faults and a third of
 * its build time in them. glibc (2.35 and later) can advise huge pages on
 * all of its heap growth itself (the tunable glibc.malloc.hugetlb=1), but
 * tunables are read at process start only: so the program sets it and
 * executes itself once more (about a millisecond; 480 faults and 1.0 s
 * instead of 1.5 s for that build). Skipped when the tunable is already
 * set, when the re-execution fails (the run goes on as before), and with
 * LVS_NO_TUNE=1. */
static void tune_heap_growth(char **argv) {
#if defined(__GLIBC__) && defined(MADV_HUGEPAGE)
  const char *t = getenv("GLIBC_TUNABLES");
  if (t && strstr(t, "glibc.malloc.hugetlb")) return;
  if (getenv("LVS_HUGETLB_TRIED")) return; /* one attempt only */
  char buf[1024];
  int k = snprintf(buf, sizeof buf, "%s%sglibc.malloc.hugetlb=1", t ? t : "", t && *t ? ":" : "");
  if (k < 0 || (size_t)k >= sizeof buf) return;
  if (setenv("GLIBC_TUNABLES", buf, 1) || setenv("LVS_HUGETLB_TRIED", "1", 1)) return;
  execv("/proc/self/exe", argv);
  /* not reached unless execv failed: go on with the heap as it is */
#else
  (void)argv;
#endif
}

static void usage(FILE *f) {
  fprintf(f,
          "usage: levelshift FILE.lua [name=value ...]\n"
          "       levelshift -e CODE [name=value ...]\n"
          "       levelshift RECIPE [name=value ...]   (a recipe by name; --recipes lists them)\n"
          "       levelshift --help | --version | --recipes\n"
          "       levelshift FILE.lua --shard K/N [name=value ...]   (a share of each sweep's points)\n"
          "       levelshift FILE.lua --merge [name=value ...]       (join the shards' part files)\n"
          "\n"
          "Runs a Lua 5.4 script with the levelshift module loaded as the global `ls`.\n"
          "name=value pairs reach the script as a table: its `...` and the global\n"
          "`params` (values that look like numbers become numbers).\n");
}

/* the error object ls.sweep raises when a shard's part is complete */
static int is_shard_done(lua_State *L, int idx) {
  if (!lua_istable(L, idx)) return 0;
  lua_getfield(L, idx, "levelshift_shard_done");
  int r = lua_toboolean(L, -1);
  lua_pop(L, 1);
  return r;
}

static int traceback(lua_State *L) {
  if (is_shard_done(L, 1)) return 1;
  const char *msg = lua_tostring(L, 1);
  if (!msg) msg = lua_pushfstring(L, "(error object is a %s value)", luaL_typename(L, 1));
  luaL_traceback(L, L, msg, 1);
  return 1;
}

/* push the params table from argv[first..] */
static int push_params(lua_State *L, int argc, char **argv, int first) {
  lua_newtable(L);
  for (int i = first; i < argc; i++) {
    const char *eq = strchr(argv[i], '=');
    if (!eq || eq == argv[i]) {
      fprintf(stderr, "levelshift: argument '%s' is not of the form name=value\n", argv[i]);
      return 0;
    }
    lua_pushlstring(L, argv[i], (size_t)(eq - argv[i]));
    const char *v = eq + 1;
    if (!lua_stringtonumber(L, v)) {
      if (strcmp(v, "true") == 0) lua_pushboolean(L, 1);
      else if (strcmp(v, "false") == 0) lua_pushboolean(L, 0);
      else lua_pushstring(L, v);
    }
    lua_settable(L, -3);
  }
  lua_pushvalue(L, -1);
  lua_setglobal(L, "params");
  return 1;
}

static int report(lua_State *L, int status) {
  if (status != LUA_OK && is_shard_done(L, -1)) {
    lua_getfield(L, -1, "message");
    fprintf(stderr, "levelshift: %s\n", lua_tostring(L, -1));
    return 0;
  }
  if (status != LUA_OK) {
    const char *msg = lua_tostring(L, -1);
    fprintf(stderr, "levelshift: %s\n", msg ? msg : "(error object is not a string)");
    return 1;
  }
  return 0;
}

static int run_chunk(lua_State *L, int loadstatus, int argc, char **argv, int first) {
  if (loadstatus != LUA_OK) return report(L, loadstatus);
  if (!push_params(L, argc, argv, first)) return 2;
  lua_pushcfunction(L, traceback);
  lua_insert(L, -3);
  int st = lua_pcall(L, 1, 0, -3);
  return report(L, st);
}

/* --shard K/N, --merge and the array-job variables -> ls._run (read by
 * ls.sweep); the two options are taken out of argv */
static int sweep_run_options(lua_State *L, int *argc, char **argv) {
  long k = 0, n = 0;
  int merge = 0, j = 2;
  const char *tid = getenv("SLURM_ARRAY_TASK_ID"), *tcnt = getenv("SLURM_ARRAY_TASK_COUNT");
  if (tid && tcnt && *tid && *tcnt) {
    const char *tmin = getenv("SLURM_ARRAY_TASK_MIN");
    long id = strtol(tid, NULL, 10), cnt = strtol(tcnt, NULL, 10), mn = tmin && *tmin ? strtol(tmin, NULL, 10) : 0;
    k = id - mn + 1;
    n = cnt;
    if (n < 1 || k < 1 || k > n) {
      fprintf(stderr, "levelshift: SLURM_ARRAY_TASK_ID=%s with COUNT=%s and MIN=%s gives no shard from 1 to %ld\n",
              tid, tcnt, tmin ? tmin : "(unset: 0)", n);
      return 2;
    }
  }
  for (int i = 2; i < *argc; i++) {
    if (!strcmp(argv[i], "--shard")) {
      char c;
      if (i + 1 >= *argc || sscanf(argv[i + 1], "%ld/%ld%c", &k, &n, &c) != 2 || n < 1 || k < 1 || k > n) {
        fprintf(stderr, "levelshift: --shard needs K/N with 1 <= K <= N, e.g. --shard 2/8\n");
        return 2;
      }
      i++;
    } else if (!strcmp(argv[i], "--merge")) {
      merge = 1;
    } else {
      argv[j++] = argv[i];
    }
  }
  *argc = j;
  if (merge && n) {
    fprintf(stderr, "levelshift: --merge and a shard (--shard or SLURM_ARRAY_TASK_ID) exclude each other\n");
    return 2;
  }
  if (!merge && !n) return 0;
  lua_getglobal(L, "ls");
  if (!lua_istable(L, -1)) {
    lua_pop(L, 1);
    return 0;
  }
  lua_createtable(L, 0, 3);
  if (n) {
    lua_pushinteger(L, k);
    lua_setfield(L, -2, "shard");
    lua_pushinteger(L, n);
    lua_setfield(L, -2, "shards");
  }
  lua_pushboolean(L, merge);
  lua_setfield(L, -2, "merge");
  lua_setfield(L, -2, "_run");
  lua_pop(L, 1);
  return 0;
}

int main(int argc, char **argv) {
  if (getenv("LVS_NO_TUNE") == NULL) tune_heap_growth(argv);
  unsetenv("LVS_HUGETLB_TRIED"); /* the programs a script starts try afresh */
  if (getenv("LVS_NO_TUNE") == NULL) tune_memory();
  if (argc < 2) {
    usage(stderr);
    return 2;
  }
  if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h")) {
    usage(stdout);
    return 0;
  }
  if (!strcmp(argv[1], "--version")) {
    printf("levelshift %s (%s)\n", lvs_version(), LUA_RELEASE);
    return 0;
  }
  if (argv[1][0] == '-' && strcmp(argv[1], "-e") && strcmp(argv[1], "--recipes")) {
    fprintf(stderr, "levelshift: unknown option '%s' (options before a script: -e, --help, --version, --recipes)\n",
            argv[1]);
    usage(stderr);
    return 2;
  }
  lvs_host *h = lvs_host_new(LVS_HOST_GLOBAL);
  if (!h) {
    fprintf(stderr, "levelshift: cannot create a Lua state\n");
    return 1;
  }
  if (*lvs_host_error(h)) {
    fprintf(stderr, "levelshift: %s\n", lvs_host_error(h));
    lvs_host_free(h);
    return 1;
  }
  lua_State *L = lvs_host_state(h);
  int rc;
  if (!strcmp(argv[1], "-e")) {
    if (argc < 3) {
      usage(stderr);
      rc = 2;
    } else {
      rc = run_chunk(L, luaL_loadbuffer(L, argv[2], strlen(argv[2]), "=(command line)"), argc, argv, 3);
    }
  } else if (!strcmp(argv[1], "--recipes") || (strchr(argv[1], '.') == NULL && strchr(argv[1], '/') == NULL)) {
    /* a recipe by name: handled by the Lua side */
    const char *code =
        "local name = ...; local ls = require 'levelshift'\n"
        "return ls._run_recipe(name, params)\n";
    int ls = luaL_loadbuffer(L, code, strlen(code), "=(recipe)");
    if (ls != LUA_OK) {
      rc = report(L, ls);
    } else if (!push_params(L, argc, argv, 2)) {
      rc = 2;
    } else {
      lua_pop(L, 1);
      lua_pushstring(L, !strcmp(argv[1], "--recipes") ? "" : argv[1]);
      /* a bad recipe name or parameter is the user's input, not a script
       * bug: the message alone (it names the recipe and the parameter) */
      rc = report(L, lua_pcall(L, 1, 0, 0));
    }
  } else {
    rc = sweep_run_options(L, &argc, argv);
    if (!rc) rc = run_chunk(L, luaL_loadfile(L, argv[1]), argc, argv, 2);
  }
  lvs_host_free(h);
  return rc;
}
