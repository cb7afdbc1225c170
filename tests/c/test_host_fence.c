/* test_host_fence.c -- the host's newer fences: one writable directory for a
 * sandbox, a wall-clock deadline per run (in Lua and inside the core),
 * lvs_host_interrupt from another thread, coroutines under the budget, a
 * host that cannot be set up whole is not made, options out of range are
 * refused, and a module loaded twice keeps one context. After each stop the
 * host carries on. */
#include <dirent.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>
#include "levelshift.h"

static int fail = 0;
static double rc_seconds; /* wall time of the last expect() */

static void expect(lvs_host *h, const char *code, int want_error, const char *text) {
  double t0 = lvs_monotonic();
  int rc = lvs_host_dostring(h, code, "=fence");
  rc_seconds = lvs_monotonic() - t0;
  if ((rc != 0) != want_error || (text && !strstr(lvs_host_error(h), text))) {
    fprintf(stderr, "FAIL [%s]: rc=%d error=%s\n", code, rc, lvs_host_error(h));
    fail++;
  }
}

static void check(int ok, const char *what) {
  if (!ok) {
    fprintf(stderr, "FAIL %s\n", what);
    fail++;
  }
}

/* entries of a directory (0 when it cannot be read), "." and ".." left out */
static int count_entries(const char *dir) {
  DIR *d = opendir(dir);
  if (!d) return 0;
  int n = 0;
  struct dirent *e;
  while ((e = readdir(d)) != NULL)
    if (strcmp(e->d_name, ".") && strcmp(e->d_name, "..")) n++;
  closedir(d);
  return n;
}

static void *interrupt_later(void *arg) {
  struct timespec ts = {0, 200 * 1000 * 1000};
  nanosleep(&ts, NULL);
  lvs_host_interrupt(arg);
  return NULL;
}

static const char *SW = "local o = ls.oscillator(12); local sw = ls.sweep{H0 = o.number, V = o.x ^ 2, from = 0, "
                        "to = 0.1, steps = 2, count = 2, progress = false}; ";

static void writable_directory(void) {
  char base[] = "/tmp/lvs_fence_XXXXXX";
  if (!mkdtemp(base)) {
    check(0, "mkdtemp");
    return;
  }
  char wdir[256], outside[256], code[1024];
  snprintf(wdir, sizeof wdir, "%s/granted", base);
  snprintf(outside, sizeof outside, "%s/other", base);
  mkdir(wdir, 0700);
  mkdir(outside, 0700);
  /* a link inside the granted directory that points out of it */
  char link[300], linkdir[300];
  snprintf(link, sizeof link, "%s/out.csv", wdir);
  snprintf(code, sizeof code, "%s/target.csv", outside);
  check(symlink(code, link) == 0, "symlink");
  snprintf(linkdir, sizeof linkdir, "%s/up", wdir);
  check(symlink(outside, linkdir) == 0, "symlink to a folder");

  /* no writable directory: every writer fails and nothing appears */
  lvs_host_opts none = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 256u << 20, 0, NULL, 0};
  lvs_host *h0 = lvs_host_new_ex(&none);
  check(h0 != NULL, "sandbox without a writable directory");
  int before = count_entries(wdir) + count_entries(outside);
  snprintf(code, sizeof code, "%s sw:write('%s/a.csv')", SW, wdir);
  expect(h0, code, 1, "writing files is disabled in this sandboxed host");
  snprintf(code, sizeof code, "%s sw:write('%s/a.json')", SW, wdir);
  expect(h0, code, 1, "writing files is disabled in this sandboxed host");
  snprintf(code, sizeof code, "%s sw:plot('%s/a.svg')", SW, wdir);
  expect(h0, code, 1, "disabled in this sandboxed host");
  snprintf(code, sizeof code,
           "local o = ls.oscillator(12); ls.sweep{H0 = o.number, V = o.x ^ 2, from = 0, to = 0.1, steps = 2, "
           "count = 2, progress = false, out = '%s/b.csv'}",
           wdir);
  expect(h0, code, 1, "writing files is disabled in this sandboxed host");
  check(count_entries(wdir) + count_entries(outside) == before, "a sandbox without a grant created a file");
  lvs_host_free(h0);

  /* a granted directory: files appear there only, every escape fails */
  lvs_host_opts o = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 256u << 20, 0, wdir, 0};
  lvs_host *h = lvs_host_new_ex(&o);
  check(h != NULL, "sandbox with a writable directory");
  if (!h) return;
  snprintf(code, sizeof code, "%s sw:write('%s/levels.csv')", SW, wdir);
  expect(h, code, 0, NULL);
  snprintf(code, sizeof code, "%s/levels.csv", wdir);
  check(access(code, R_OK) == 0, "the granted directory got levels.csv");
  snprintf(code, sizeof code,
           "local o = ls.oscillator(12); ls.sweep{H0 = o.number, V = o.x ^ 2, from = 0, to = 0.1, steps = 2, "
           "count = 2, progress = false, out = '%s/run.csv'}",
           wdir);
  expect(h, code, 0, NULL);
  const char *escapes[] = {"%s/../other/x.csv", "%s/up/x.csv", "%s/out.csv", "/tmp/lvs_fence_escape.csv",
                           "x.csv", "%s", "%s/../granted/../other/x.csv"};
  for (size_t k = 0; k < sizeof escapes / sizeof *escapes; k++) {
    char path[400], c2[1200];
    snprintf(path, sizeof path, escapes[k], wdir);
    snprintf(c2, sizeof c2, "%s sw:write('%s')", SW, path);
    expect(h, c2, 1, "sweep:write");
    snprintf(c2, sizeof c2, "ls._write_file('%s', 'x')", path);
    expect(h, c2, 1, "write");
  }
  check(count_entries(outside) == 0, "an escape wrote into the other folder");
  /* the writable directory is never read as code, even on the module path:
   * a file written there (the writer's text is partly the script's, through
   * labels) cannot be required by a later run */
  lvs_host_add_path(h, wdir);
  snprintf(code, sizeof code, "%s/planted.lua", wdir);
  FILE *pf = fopen(code, "w"); /* as if a script had managed to write it */
  if (pf) {
    fputs("planted = true", pf);
    fclose(pf);
  }
  expect(h, "require 'planted'", 1, "no file in this host's folders");
  expect(h, "assert(planted == nil)", 0, NULL);
  check(access("/tmp/lvs_fence_escape.csv", F_OK) != 0, "an escape wrote /tmp/lvs_fence_escape.csv");
  lvs_host_free(h);
  snprintf(code, sizeof code, "rm -rf '%s'", base);
  check(system(code) == 0, "clean-up");
}

static void deadline_and_interrupt(void) {
  lvs_host_opts o = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 512u << 20, 0, NULL, 1.0};
  lvs_host *h = lvs_host_new_ex(&o);
  check(h != NULL, "host with a deadline");
  if (!h) return;
  /* in Lua, also through pcall and an endless message handler */
  expect(h, "while true do end", 1, "deadline of 1 s exceeded");
  check(rc_seconds < 1.5, "Lua loop stopped within 1.5 s");
  expect(h, "while true do pcall(function() while true do end end) end", 1, "deadline of 1 s exceeded");
  check(rc_seconds < 1.5, "pcall loop stopped within 1.5 s");
  expect(h, "xpcall(function() while true do end end, function() while true do end end)", 1, "deadline of 1 s");
  check(rc_seconds < 1.5, "xpcall handler stopped within 1.5 s");
  /* in the core: a 6000-state dense solve cannot fit in 1 s (about 1.3e12
   * flop at the fence's optimistic rate) and is refused before it starts */
  expect(h, "local H = ls.oscillator(6000).x ^ 2; ls.eigen(H, {method = 'dense'})", 1, "deadline of 1 s");
  check(rc_seconds < 1.5, "dense eigen refused within 1.5 s");
  /* a long Krylov solve stops in its loop: a 2^18-state chain */
  expect(h,
         "local P = ls.product(ls.spin(0.5), 18); local H = ls.sum(1, 17, function(i) "
         "local a, b = P:site(i), P:site(i + 1); return a.Sz * b.Sz + 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp) end) "
         "+ 0.3 * ls.sum(1, 18, function(i) return P:site(i).Sx end); ls.eigen(H, {count = 4, vectors = false})",
         1, "deadline of 1 s exceeded in eigen (Krylov)");
  check(rc_seconds < 2.0, "Krylov solve stopped within 2 s");
  /* the next run works */
  expect(h, "assert(ls.eigen(ls.spin(0.5).Sz)[1] == -0.5)", 0, NULL);
  lvs_host_free(h);

  /* lvs_host_interrupt from another thread stops Lua and the core */
  lvs_host *hi = lvs_host_new(LVS_HOST_GLOBAL);
  check(hi != NULL, "plain host");
  if (!hi) return;
  pthread_t t;
  pthread_create(&t, NULL, interrupt_later, hi);
  expect(hi, "while true do end", 1, "interrupted by the host");
  pthread_join(t, NULL);
  check(rc_seconds < 1.0, "interrupt stopped Lua within 1 s");
  pthread_create(&t, NULL, interrupt_later, hi);
  expect(hi,
         "local o = ls.oscillator(3000); local sw = ls.sweep{H0 = o.number, V = o.x ^ 2, from = 0, to = 1, "
         "steps = 100000, count = 4, progress = false}",
         1, "interrupted by the host in sweep");
  pthread_join(t, NULL);
  check(rc_seconds < 2.0, "interrupt stopped a sweep within 2 s");
  expect(hi, "assert(#ls.eigen(ls.spin(1).Sz) == 3)", 0, NULL);
  lvs_host_free(hi);
}

static void budget_and_setup(void) {
  /* 10,000 short coroutines: each resume is charged */
  lvs_host_opts o = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 64u << 20, 2000000ull, NULL, 0};
  lvs_host *h = lvs_host_new_ex(&o);
  check(h != NULL, "budget host");
  if (!h) return;
  expect(h,
         "for k = 1, 1e7 do local co = coroutine.create(function() for i = 1, 300 do end end); "
         "coroutine.resume(co) end",
         1, "instruction budget of 2000000 exhausted");
  expect(h, "for k = 1, 1e7 do coroutine.wrap(function() for i = 1, 300 do end end)() end", 1,
         "instruction budget of 2000000 exhausted");
  expect(h, "assert(coroutine.wrap(function(a) return a + 1 end)(41) == 42)", 0, NULL);
  lvs_host_free(h);

  /* a cap too small to set the host up: NULL, never a half-built sandbox;
   * every cap from 4 KiB to 2 MiB either makes a whole host or none */
  for (size_t cap = 4096; cap <= (2u << 20); cap = cap * 5 / 4) {
    lvs_host_opts oc = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, cap, 0, NULL, 0};
    lvs_host *hc = lvs_host_new_ex(&oc);
    if (hc) {
      int rc = lvs_host_dostring(hc, "assert(io == nil and os == nil and ls ~= nil and string.dump == nil)", "=c");
      if (rc && !strstr(lvs_host_error(hc), "not enough memory")) {
        fprintf(stderr, "FAIL cap %zu: a host without its fences: %s\n", cap, lvs_host_error(hc));
        fail++;
      }
      lvs_host_free(hc);
    }
  }
  lvs_host_opts small = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 17920, 0, NULL, 0}; /* 17.5 KiB */
  lvs_host *hs = lvs_host_new_ex(&small);
  check(hs == NULL, "17.5 KiB cap: no host");
  lvs_host_free(hs);

  /* options out of range */
  double bad[] = {-1.0, 1.0 / 0.0, 0.0 / 0.0};
  for (int k = 0; k < 3; k++) {
    lvs_host_opts ob = {LVS_HOST_SANDBOX, 0, 0, NULL, bad[k]};
    lvs_host *hb = lvs_host_new_ex(&ob);
    check(hb == NULL, "a bad deadline makes no host");
    lvs_host_free(hb);
  }
  lvs_host_opts od = {LVS_HOST_SANDBOX, 0, 0, "/etc/passwd", 0};
  lvs_host *hd = lvs_host_new_ex(&od);
  check(hd == NULL, "a write_dir that is not a directory makes no host");
  lvs_host_free(hd);
}

static void runs_start_afresh(void) {
  /* a script's changes to the library and the shared tables stay in its run */
  lvs_host_opts o = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 64u << 20, 0, NULL, 0};
  lvs_host *h = lvs_host_new_ex(&o);
  check(h != NULL, "sandbox");
  if (!h) return;
  expect(h,
         "ls.eigen = nil; string.format = nil; table.concat = nil; getmetatable(ls.spin(1).Sz).__add = nil; "
         "ls.config{dense_cap = 1000}; package.path = '/tmp/?.lua'; kept = 7; print = nil; "
         "setmetatable(ls, {__index = function() error('poisoned') end}); ls = nil",
         0, NULL);
  expect(h,
         "assert(ls and ls.eigen and string.format and table.concat and print and kept == 7); "
         "assert(#ls.eigen(ls.spin(1).Sz + ls.spin(1).Sz) == 3); assert(ls.config().dense_cap > 1e6); "
         "assert(ls.nothing == nil and package.path ~= '/tmp/?.lua')",
         0, NULL);
  lvs_host_free(h);
}

static void module_reload(void) {
  /* the module loaded a second time keeps the state's one context: objects
   * of the first load stay usable after its table is gone, and closing an
   * op inside a call of the old module's functions is still guarded */
  lvs_host *h = lvs_host_new(0);
  check(h != NULL, "plain host");
  if (!h) return;
  expect(h,
         "local ls1 = require 'levelshift'; local A = ls1.spin(1).Sz * 2; "
         "package.loaded['levelshift'] = nil; package.loaded['levelshift.core'] = nil; "
         "package.loaded['levelshift.series'] = nil; package.loaded['levelshift.sweep'] = nil; "
         "package.loaded['levelshift.recipes'] = nil; package.loaded['levelshift.units'] = nil; "
         "ls1 = nil; collectgarbage(); collectgarbage(); "
         "local ls2 = require 'levelshift'; local B = A + ls2.spin(1).Sz; collectgarbage(); "
         "assert(#ls2.eigen(B) == 3); A = nil; B = nil; collectgarbage()",
         0, NULL);
  expect(h,
         "local ls1 = require 'levelshift'; package.loaded['levelshift.core'] = nil; "
         "local core2 = require 'levelshift.core'; local o = ls1.oscillator(40); local V = o.x ^ 2; "
         "local ok, e = pcall(ls1.sweep, {H0 = o.number, V = V, from = 0, to = 1, steps = 3, count = 2, "
         "progress = false}); collectgarbage(); assert(ok, e)",
         0, NULL);
  lvs_host_free(h);
}

int main(void) {
  writable_directory();
  deadline_and_interrupt();
  budget_and_setup();
  runs_start_afresh();
  module_reload();
  if (!fail) printf("test_host_fence: all checks passed\n");
  return fail ? 1 : 0;
}
