/*
 * engine/fault.c -- the test-only fault seam.
 *
 * Purpose: let the API tests prove that a deadline holds when a worker is
 * stuck inside one long call, that SIGTERM still stops the daemon, and
 * that a slow interval computation delays nobody else. Compiled in only
 * with -DFG_FAULTS=ON (off by default; never in a release); otherwise every
 * hook is a no-op and fg_faults_init arms nothing.
 *
 * Arming (read once, by fg_faults_init at start-up, from the environment):
 *   FG_FAULT_STALL_SEED, FG_FAULT_STALL_SAMPLE: the first block of a check
 *     with that seed that covers sample index FG_FAULT_STALL_SAMPLE (0 when
 *     unset) on the validation stream stalls forever, ignoring the cancel
 *     flag and the deadline (once per process);
 *   FG_FAULT_SLOW_SEED, FG_FAULT_SLOW_MS: every interval computation of a
 *     check with that seed (end-of-run figures and the running interval a
 *     reader computes) first sleeps FG_FAULT_SLOW_MS milliseconds.
 *
 * Thread use: fg_faults_init on the main thread before any worker starts;
 * the hooks from any thread (the armed values never change afterwards).
 */
#include "engine/engine_internal.h"

#include <stdlib.h>
#include <time.h>

#ifdef FG_FAULTS

static bool stall_armed, slow_armed;
static uint64_t stall_seed, stall_sample, slow_seed;
static long slow_ms;
static atomic_bool stall_used;

static bool env_u64(const char *name, uint64_t *out) {
  const char *s = getenv(name);
  if (!s || !*s) return false;
  char *end = NULL;
  unsigned long long v = strtoull(s, &end, 10);
  if (*end) return false;
  *out = v;
  return true;
}

bool fg_faults_init(void) {
  uint64_t v = 0;
  stall_armed = env_u64("FG_FAULT_STALL_SEED", &stall_seed);
  stall_sample = env_u64("FG_FAULT_STALL_SAMPLE", &v) ? v : 0;
  slow_armed = env_u64("FG_FAULT_SLOW_SEED", &slow_seed);
  slow_ms = env_u64("FG_FAULT_SLOW_MS", &v) && v <= 600000 ? (long)v : 0;
  return true;
}

bool fg_fault_stall(uint64_t seed, uint64_t first, int n) {
  if (!stall_armed || seed != stall_seed) return false;
  if (stall_sample < first || stall_sample >= first + (uint64_t)n) return false;
  bool expected = false;
  if (!atomic_compare_exchange_strong(&stall_used, &expected, true))
    return false;
  for (;;) { /* stuck for good: only the process's exit ends it */
    struct timespec ts = {1, 0};
    nanosleep(&ts, NULL);
  }
  return true;
}

void fg_fault_slow_interval(uint64_t seed) {
  if (!slow_armed || seed != slow_seed || slow_ms <= 0) return;
  struct timespec ts = {slow_ms / 1000, (slow_ms % 1000) * 1000000L};
  nanosleep(&ts, NULL);
}

#else

bool fg_faults_init(void) {
  return false;
}

bool fg_fault_stall(uint64_t seed, uint64_t first, int n) {
  (void)seed;
  (void)first;
  (void)n;
  return false;
}

void fg_fault_slow_interval(uint64_t seed) {
  (void)seed;
}

#endif
