/*
 * engine/util.c -- names of the engine's enums (the clock and seeds are
 * core/clock.c).
 *
 * Thread use: all functions are safe from any thread.
 */
#include "feasgate/engine.h"

#include <fcntl.h>
#include <stdio.h>
#include <sys/random.h>
#include <time.h>
#include <unistd.h>

const char *fg_verdict_name(fg_verdict v) {
  switch (v) {
  case FG_VERDICT_PASS: return "pass";
  case FG_VERDICT_FAIL: return "fail";
  case FG_VERDICT_INCONCLUSIVE: return "inconclusive";
  }
  return "unknown";
}

const char *fg_check_state_name(fg_check_state s) {
  switch (s) {
  case FG_CHECK_QUEUED: return "running"; /* queued checks read as running */
  case FG_CHECK_RUNNING: return "running";
  case FG_CHECK_DONE: return "done";
  case FG_CHECK_CANCELLED: return "cancelled";
  case FG_CHECK_TIMED_OUT: return "timed_out";
  case FG_CHECK_FAILED: return "failed";
  case FG_CHECK_INTERRUPTED: return "interrupted";
  }
  return "unknown";
}

const char *fg_interval_method_name(fg_interval_method m) {
  switch (m) {
  case FG_INTERVAL_CLOPPER_PEARSON: return "clopper_pearson";
  case FG_INTERVAL_WILSON: return "wilson";
  case FG_INTERVAL_JEFFREYS: return "jeffreys";
  }
  return "unknown";
}

const char *fg_sampling_name(fg_sampling s) {
  switch (s) {
  case FG_SAMPLING_MONTE_CARLO: return "monte_carlo";
  case FG_SAMPLING_ANTITHETIC: return "antithetic";
  case FG_SAMPLING_LATIN_HYPERCUBE: return "latin_hypercube";
  case FG_SAMPLING_SOBOL: return "sobol";
  }
  return "unknown";
}
