/*
 * cli/scenarios.c -- `feasgate scenarios MODEL.json`: a model's random
 * scenarios as JSON or CSV (engine/scenarios.c writes them to standard
 * output as they are drawn).
 *
 * Thread use: the main thread.
 */
#include "cli/cli.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static bool stdout_sink(void *ctx, const char *text, size_t len) {
  return fwrite(text, 1, len, (FILE *)ctx) == len;
}

static void scenarios_usage(FILE *f) {
  fprintf(f,
          "usage: feasgate scenarios MODEL.json [--count N] [--seed S] "
          "[--start I]\n"
          "                          [--stream design|validation] [--csv] "
          "[--max M]\n"
          "Prints scenarios I .. I+N-1 of the model's random inputs as JSON\n"
          "{\"columns\", \"rows\", \"seed\", \"stream\", \"start\"} or, with "
          "--csv, as CSV\n"
          "with a header row. N is %llu by default and at most %llu unless "
          "a\nlarger --max M is given.\n"
          "Without --seed a seed is drawn and printed on standard error.\n",
          (unsigned long long)FG_SCENARIOS_COUNT_DEFAULT,
          (unsigned long long)FG_MAX_SCENARIOS_DEFAULT);
}

int fg_scenarios_command(int argc, char **argv) {
  const char *file = NULL;
  fg_scenarios_params q = {.count = FG_SCENARIOS_COUNT_DEFAULT};
  uint64_t max = FG_MAX_SCENARIOS_DEFAULT;
  bool has_seed = false;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
    if (strcmp(a, "--help") == 0) {
      scenarios_usage(stdout);
      return 0;
    } else if (strcmp(a, "--csv") == 0) {
      q.csv = true;
    } else if (strcmp(a, "--count") == 0 && v) {
      if (!fg_cli_parse_u64(argv[++i], FG_SEED_MAX, &q.count) || !q.count) {
        fprintf(stderr, "feasgate scenarios: --count: expected a whole "
                        "number from 1, found '%s'\n", v);
        return FG_EXIT_USAGE;
      }
    } else if (strcmp(a, "--seed") == 0 && v) {
      if (!fg_cli_parse_u64(argv[++i], FG_SEED_MAX, &q.seed)) {
        fprintf(stderr, "feasgate scenarios: --seed: expected 0 to 2^53-1, "
                        "found '%s'\n", v);
        return FG_EXIT_USAGE;
      }
      has_seed = true;
    } else if (strcmp(a, "--start") == 0 && v) {
      if (!fg_cli_parse_u64(argv[++i], FG_SEED_MAX, &q.start)) {
        fprintf(stderr, "feasgate scenarios: --start: expected 0 to "
                        "2^53-1, found '%s'\n", v);
        return FG_EXIT_USAGE;
      }
    } else if (strcmp(a, "--max") == 0 && v) {
      if (!fg_cli_parse_u64(argv[++i], FG_SEED_MAX, &max) || !max) {
        fprintf(stderr, "feasgate scenarios: --max: expected a whole number "
                        "from 1, found '%s'\n", v);
        return FG_EXIT_USAGE;
      }
    } else if (strcmp(a, "--stream") == 0 && v) {
      i++;
      if (strcmp(v, "design") == 0) q.validation = false;
      else if (strcmp(v, "validation") == 0) q.validation = true;
      else {
        fprintf(stderr, "feasgate scenarios: --stream: expected design or "
                        "validation, found '%s'\n", v);
        return FG_EXIT_USAGE;
      }
    } else if (a[0] == '-' && a[1]) {
      fprintf(stderr, "feasgate scenarios: unknown or incomplete option "
                      "'%s'\n", a);
      scenarios_usage(stderr);
      return FG_EXIT_USAGE;
    } else if (!file) {
      file = a;
    } else {
      fprintf(stderr, "feasgate scenarios: too many arguments ('%s')\n", a);
      return FG_EXIT_USAGE;
    }
  }
  if (!file) {
    fprintf(stderr, "feasgate scenarios: a model file is required\n");
    scenarios_usage(stderr);
    return FG_EXIT_USAGE;
  }
  if (q.count > max) {
    fprintf(stderr, "feasgate scenarios: --count %llu exceeds the cap of "
                    "%llu scenarios; give --max %llu to allow it\n",
            (unsigned long long)q.count, (unsigned long long)max,
            (unsigned long long)q.count);
    return FG_EXIT_USAGE;
  }
  if (q.count > FG_SEED_MAX + 1 - q.start) {
    fprintf(stderr, "feasgate scenarios: --start %llu + --count %llu goes "
                    "beyond scenario index 2^53\n",
            (unsigned long long)q.start, (unsigned long long)q.count);
    return FG_EXIT_USAGE;
  }
  if (!has_seed) {
    q.seed = fg_seed_draw();
    fprintf(stderr, "feasgate scenarios: seed %llu\n",
            (unsigned long long)q.seed);
  }
  fg_model *m = fg_cli_load_model(file);
  if (!m) return FG_EXIT_USAGE;
  fg_problem p;
  fg_problem_init(&p);
  int rc = 0;
  if (fg_scenarios_write(m, &q, stdout_sink, stdout, &p) != FG_OK ||
      fflush(stdout) != 0) {
    fg_cli_print_problem("scenarios", &p, NULL, 0);
    rc = 1;
  }
  fg_model_unref(m);
  return rc;
}
