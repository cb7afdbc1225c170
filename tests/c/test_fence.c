/* test_fence.c -- a host fences scripts: sandbox, memory cap, instruction
 * budget; after each stop the host carries on. */
#include <stdio.h>
#include <string.h>
#include "levelshift.h"

static int fail = 0;
static void expect(lvs_host *h, const char *code, int want_error, const char *text) {
  int rc = lvs_host_dostring(h, code, "=fence");
  if ((rc != 0) != want_error || (text && !strstr(lvs_host_error(h), text))) {
    fprintf(stderr, "FAIL [%s]: rc=%d error=%s\n", code, rc, lvs_host_error(h));
    fail++;
  }
}

int main(void) {
  lvs_host_opts o = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 64u << 20, 20000000ull, NULL, 0};
  lvs_host *h = lvs_host_new_ex(&o);
  if (!h) return 1;
  expect(h, "assert(#ls.eigen(ls.spin(1).Sz) == 3)", 0, NULL);
  expect(h, "assert(io == nil and os == nil and debug == nil and dofile == nil)", 0, NULL);
  expect(h, "require 'lfs'", 1, "module 'lfs' not found");
  expect(h, "assert(string.dump == nil)", 0, NULL);
  /* require and the recipe loader read text chunks only: a precompiled
   * module (written here by the test, outside the sandbox) is refused */
  {
    lvs_host *plain = lvs_host_new(0);
    expect(plain,
           "os.execute('mkdir -p /tmp/lvs_fence_mods'); "
           "local f = assert(io.open('/tmp/lvs_fence_mods/lvs_fence_bc.lua', 'wb')) "
           "f:write(string.dump(function() return 42 end)) f:close(); "
           "f = assert(io.open('/tmp/lvs_fence_probe_secret.lua', 'w')) f:write('secret_token = 1') f:close()",
           0, NULL);
    lvs_host_free(plain);
  }
  /* a folder the host put on the module path: text chunks only */
  lvs_host_add_path(h, "/tmp/lvs_fence_mods");
  expect(h,
         "local saved = package.path; package.path = '/tmp/lvs_fence_mods/?.lua'; "
         "local ok, e = pcall(require, 'lvs_fence_bc'); package.path = saved; error(e)",
         1, "attempt to load a binary chunk");
  /* elsewhere nothing is read, and nothing tells whether a file exists */
  expect(h,
         "local saved = package.path; package.path = '/tmp/?.lua'; "
         "local ok, e = pcall(require, 'lvs_fence_probe_secret'); package.path = saved; error(e)",
         1, "no file in this host's folders");
  expect(h, "assert(package.searchpath('lvs_fence_probe_secret', '/tmp/?.lua') == nil)", 0, NULL);
  expect(h, "assert(package.searchpath('passwd', '/etc/?') == nil)", 0, NULL);
  expect(h, "local t, e = ls._recipe_files('/tmp'); assert(t == nil and e:find('not a folder this host reads'))", 0,
         NULL);
  expect(h, "ls.recipes.add_dir('/tmp'); ls.recipe('lvs_fence_probe_secret')", 1, NULL);
  expect(h, "assert(secret_token == nil)", 0, NULL);
  remove("/tmp/lvs_fence_mods/lvs_fence_bc.lua");
  remove("/tmp/lvs_fence_mods");
  remove("/tmp/lvs_fence_probe_secret.lua");
  expect(h, "ls._write_file('/tmp/lvs_fence_probe.csv', 'x')", 1, "write: writing files is disabled");
  /* the library's own writers stay shut in a sandbox (the script has no io
   * or os, so it must not reach the file system through ls either); none of
   * these may leave a file behind */
  const char *sw = "local o = ls.oscillator(12); local sw = ls.sweep{H0 = o.number, V = o.x ^ 2, from = 0, "
                   "to = 0.1, steps = 2, count = 2, progress = false}; ";
  char code[512];
  snprintf(code, sizeof code, "%s sw:write('/tmp/lvs_fence_probe.csv')", sw);
  expect(h, code, 1, "sweep:write: writing files is disabled in this sandboxed host");
  snprintf(code, sizeof code, "%s sw:write('/tmp/lvs_fence_probe.json')", sw);
  expect(h, code, 1, "writing files is disabled in this sandboxed host");
  snprintf(code, sizeof code, "%s sw:plot('/tmp/lvs_fence_probe.svg')", sw);
  expect(h, code, 1, "writing files is disabled in this sandboxed host");
  expect(h,
         "local o = ls.oscillator(12); ls.sweep{H0 = o.number, V = o.x ^ 2, from = 0, to = 0.1, steps = 2, "
         "count = 2, progress = false, out = '/tmp/lvs_fence_probe.csv'}",
         1, "writing files is disabled in this sandboxed host");
  const char *probes[] = {"/tmp/lvs_fence_probe.csv", "/tmp/lvs_fence_probe.json", "/tmp/lvs_fence_probe.svg",
                          "/tmp/lvs_fence_probe.csv.part"};
  for (int k = 0; k < 4; k++) {
    FILE *f = fopen(probes[k], "r");
    if (f) {
      fclose(f);
      remove(probes[k]);
      fprintf(stderr, "FAIL a sandboxed script wrote %s\n", probes[k]);
      fail++;
    }
  }
  /* runaway script */
  expect(h, "while true do end", 1, "instruction budget of 20000000 exhausted");
  expect(h, "local ok = pcall(function() while true do end end); while true do end", 1, "budget");
  /* the budget holds in a message handler and against finalizers */
  expect(h, "xpcall(function() while true do end end, function() while true do end end)", 1,
         "instruction budget of 20000000 exhausted");
  expect(h, "assert(select(2, xpcall(error, function(e) return 'handled: ' .. e end, 'x')) == 'handled: x')", 0,
         NULL);
  expect(h, "setmetatable({}, {__gc = function() while true do end end})", 1,
         "__gc metamethods are disabled under an instruction budget");
  /* greedy script in Lua */
  expect(h, "local t = {} for i = 1, 1e9 do t[i] = i end", 1, "not enough memory");
  /* greedy request in the core: a 6000 x 6000 dense working copy (288 MB) */
  expect(h, "ls.eigen(ls.oscillator(6000).number)", 1, "out of memory");
  /* LAPACK's workspace counts against the cap too: a 1500-state dense solve
   * needs 18 MB for the op, 18 MB for its working copy and 36 MB of dsyevd
   * workspace (1 + 6n + 2n^2 doubles, LAPACK's documentation of dsyevd),
   * above 64 MiB together; the workspace used to be malloc'd by LAPACKE */
  {
    lvs_host_opts oc = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 64u << 20, 0, NULL, 0};
    lvs_host *hc = lvs_host_new_ex(&oc);
    if (!hc) return 1;
    expect(hc, "local Q = ls.random_orthogonal(1500); local H = Q + Q:adj(); Q = nil; collectgarbage(); ls.eigen(H)",
           1, "out of memory for LAPACK's workspace");
    expect(hc, "assert(#ls.eigen(ls.random_orthogonal(200) + ls.random_orthogonal(200):adj()) == 200)", 0, NULL);
    if (lvs_host_memory(hc) > (64u << 20)) {
      fprintf(stderr, "FAIL memory above the cap (workspace host)\n");
      fail++;
    }
    lvs_host_free(hc);
  }
  /* and the host goes on */
  expect(h, "assert(ls.eigen(ls.spin(0.5).Sz)[1] == -0.5)", 0, NULL);
  if (lvs_host_memory(h) > (64u << 20)) {
    fprintf(stderr, "FAIL memory above the cap\n");
    fail++;
  }
  lvs_host_free(h);
  if (!fail) printf("test_fence: all checks passed\n");
  return fail ? 1 : 0;
}
