/*
 * core/clock.c -- the one clock and the one source of seeds
 * (feasgate/clock.h), with the seam tests use to replace them.
 *
 * Design: the source is a struct of function pointers read under a
 * read-mostly atomic pointer: readings take no lock. The system source
 * reads CLOCK_MONOTONIC and CLOCK_REALTIME and draws seeds with
 * getrandom(2) (falling back to the time and process id if the kernel
 * refuses, which does not happen on the supported kernels).
 *
 * Thread use: readings from any thread; fg_clock_use from tests only,
 * while no other thread reads the clock.
 */
#include "feasgate/clock.h"
#include "feasgate/limits.h"

#include <stdatomic.h>
#include <stdbool.h>
#include <stdio.h>
#include <sys/random.h>
#include <unistd.h>

static fg_clock_source installed;
static _Atomic(const fg_clock_source *) current = NULL;

void fg_clock_use(const fg_clock_source *src) {
  if (!src) {
    atomic_store(&current, NULL);
    return;
  }
  installed = *src;
  atomic_store(&current, &installed);
}

static double system_clock(clockid_t id) {
  struct timespec ts;
  clock_gettime(id, &ts);
  return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

double fg_time_monotonic(void) {
  const fg_clock_source *s = atomic_load(&current);
  if (s && s->monotonic) return s->monotonic(s->ctx);
  return system_clock(CLOCK_MONOTONIC);
}

double fg_time_wall(void) {
  const fg_clock_source *s = atomic_load(&current);
  if (s && s->wall) return s->wall(s->ctx);
  return system_clock(CLOCK_REALTIME);
}

/* Whole seconds and milliseconds of the wall clock. */
static void wall_parts(time_t *sec, int *ms) {
  const fg_clock_source *s = atomic_load(&current);
  if (s && s->wall) {
    double w = s->wall(s->ctx);
    double whole = (double)(time_t)w;
    if (whole > w) whole -= 1.0;
    *sec = (time_t)whole;
    *ms = (int)((w - whole) * 1000.0) % 1000;
    return;
  }
  struct timespec ts;
  clock_gettime(CLOCK_REALTIME, &ts);
  *sec = ts.tv_sec;
  *ms = (int)(ts.tv_nsec / 1000000L) % 1000;
}

/* "YYYY-MM-DDTHH:MM:SS" then ".mmmZ" (with_ms) or "Z". */
static void rfc3339(char *buf, size_t cap, bool with_ms) {
  time_t sec;
  int ms;
  wall_parts(&sec, &ms);
  struct tm tm;
  gmtime_r(&sec, &tm);
  char base[32];
  strftime(base, sizeof base, "%Y-%m-%dT%H:%M:%S", &tm);
  if (with_ms)
    snprintf(buf, cap, "%s.%03dZ", base, ms);
  else
    snprintf(buf, cap, "%sZ", base);
}

void fg_time_now_rfc3339(char *buf, size_t cap) { rfc3339(buf, cap, false); }

void fg_time_now_rfc3339_ms(char *buf, size_t cap) {
  rfc3339(buf, cap, true);
}

void fg_clock_abs_deadline(struct timespec *ts, double seconds) {
  clock_gettime(CLOCK_REALTIME, ts);
  if (!(seconds > 0)) return;
  if (seconds > 1e9) seconds = 1e9; /* about 31 years: far enough */
  time_t whole = (time_t)seconds;
  ts->tv_sec += whole;
  ts->tv_nsec += (long)((seconds - (double)whole) * 1e9);
  if (ts->tv_nsec >= 1000000000L) {
    ts->tv_sec++;
    ts->tv_nsec -= 1000000000L;
  }
}

uint64_t fg_seed_draw(void) {
  const fg_clock_source *s = atomic_load(&current);
  uint64_t v = 0;
  if (s && s->seed) {
    v = s->seed(s->ctx);
  } else if (getrandom(&v, sizeof v, 0) != (ssize_t)sizeof v) {
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    v = (uint64_t)ts.tv_nsec * 0x9E3779B97F4A7C15ull ^ (uint64_t)ts.tv_sec ^
        ((uint64_t)getpid() << 32);
  }
  return v & FG_SEED_MAX;
}
