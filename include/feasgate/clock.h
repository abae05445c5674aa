/*
 * feasgate/clock.h -- the one clock and the one source of seeds.
 *
 * Every reading of time in feasgate goes through here: monotonic seconds
 * for deadlines, intervals and durations; wall-clock time for the
 * timestamps of records and log lines; fresh seeds for requests that do
 * not give one. A test can put its own source in place (fg_clock_use)
 * so that times and seeds are what the test says.
 *
 * What stays outside: absolute deadlines handed to pthread_cond_timedwait
 * (the kernel's own clock, fg_clock_abs_deadline converts), and
 * PostgreSQL's clock for replica heartbeats (the database's time, shared
 * by every replica, on purpose).
 *
 * Thread use: readings from any thread. fg_clock_use is for tests, before
 * threads that read the clock start or after they stop.
 */
#ifndef FEASGATE_CLOCK_H
#define FEASGATE_CLOCK_H

#include <stddef.h>
#include <stdint.h>
#include <time.h>

/* A source of time and seeds. Any member may be NULL (the system's is
 * used for it). */
typedef struct fg_clock_source {
  double (*monotonic)(void *ctx); /* seconds, never decreasing */
  double (*wall)(void *ctx);      /* seconds since 1970-01-01T00:00:00Z */
  uint64_t (*seed)(void *ctx);    /* any 64 bits; masked to FG_SEED_MAX */
  void *ctx;
} fg_clock_source;

/* Use `src` from now on (NULL: the system's clocks and entropy again).
 * The struct is copied. */
void fg_clock_use(const fg_clock_source *src);

/* Monotonic seconds (CLOCK_MONOTONIC). */
double fg_time_monotonic(void);
/* Wall-clock seconds since the epoch (CLOCK_REALTIME). */
double fg_time_wall(void);
/* RFC 3339 UTC time of now to the second, e.g. "2026-12-01T21:40:00Z"
 * (buf >= 32). */
void fg_time_now_rfc3339(char *buf, size_t cap);
/* The same with milliseconds, "2026-12-01T21:40:00.123Z" (log lines;
 * buf >= 48). */
void fg_time_now_rfc3339_ms(char *buf, size_t cap);
/* The absolute CLOCK_REALTIME time `seconds` from now, as
 * pthread_cond_timedwait wants it (the kernel's clock, not the seam's:
 * condition variables wait on it). seconds >= 0. */
void fg_clock_abs_deadline(struct timespec *ts, double seconds);
/* A fresh seed in [0, FG_SEED_MAX] from the system's entropy. */
uint64_t fg_seed_draw(void);

#endif
