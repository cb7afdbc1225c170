/* test_fuzzhost.c -- the fuzz harness (tests/fuzz/harness.lua) inside
 * sandboxed hosts with the newer fences: a writable directory, a short
 * deadline that stops runs at random points, and lvs_host_interrupt fired
 * from another thread during runs. Each run ends normally or with the
 * fence's own message, nothing outside the writable directory changes, and
 * the host carries on (the sanitizer build runs this too). */
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include "levelshift.h"

static int fail = 0;

static const char *const code_fmt =
    "local H = require 'harness'\n"
    "local F = H.new(ls, {seed = %d, dense_cap = 64 << 20})\n"
    "local ok, e = pcall(F.run, %d)\n"
    "local rep = F.report()\n"
    "F.finish()\n"
    "if not ok then error(e, 0) end\n"
    "assert(#rep == 0, table.concat(rep, '\\n'))\n";

typedef struct {
  lvs_host *h;
  long ms;
} shot;

static void *interrupt_after(void *arg) {
  shot *s = arg;
  struct timespec ts = {s->ms / 1000, (s->ms % 1000) * 1000000L};
  nanosleep(&ts, NULL);
  lvs_host_interrupt(s->h);
  return NULL;
}

/* a run either passes or stops with the fence's message */
static void run_round(lvs_host *h, int seed, int calls, const char *stop) {
  char code[1024];
  snprintf(code, sizeof code, code_fmt, seed, calls);
  if (lvs_host_dostring(h, code, "=fuzzhost") && !strstr(lvs_host_error(h), stop)) {
    fprintf(stderr, "FAIL seed %d: %s\n", seed, lvs_host_error(h));
    fail++;
  }
  if (lvs_host_dostring(h, "assert(ls.eigen(ls.spin(1).Sz)[1] == -1)", "=after")) {
    fprintf(stderr, "FAIL host unusable after seed %d: %s\n", seed, lvs_host_error(h));
    fail++;
  }
}

int main(void) {
  char dir[] = "/tmp/lvs_fuzzhost_XXXXXX";
  if (!mkdtemp(dir)) return 1;
  /* a writable directory and a deadline that cuts runs short */
  lvs_host_opts o = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 256u << 20, 0, dir, 0.25};
  lvs_host *h = lvs_host_new_ex(&o);
  if (!h) return 1;
  lvs_host_add_path(h, "tests/fuzz");
  for (int r = 0; r < 4; r++) run_round(h, 100 + r, 3000, "deadline of 0.25 s");
  lvs_host_free(h);
  /* interrupts from another thread at scattered moments */
  lvs_host_opts oi = {LVS_HOST_GLOBAL | LVS_HOST_SANDBOX, 256u << 20, 0, dir, 0};
  lvs_host *hi = lvs_host_new_ex(&oi);
  if (!hi) return 1;
  lvs_host_add_path(hi, "tests/fuzz");
  for (int r = 0; r < 4; r++) {
    shot s = {hi, 20 + 37 * r};
    pthread_t t;
    pthread_create(&t, NULL, interrupt_after, &s);
    run_round(hi, 200 + r, 3000, "interrupted by the host");
    pthread_join(t, NULL);
  }
  lvs_host_free(hi);
  char cmd[128];
  snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
  if (system(cmd) != 0) fail++;
  if (!fail) printf("test_fuzzhost: all checks passed\n");
  return fail ? 1 : 0;
}
