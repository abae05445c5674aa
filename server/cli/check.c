/*
 * cli/check.c -- `feasgate check MODEL.json REQUEST.json`: one check
 * offline on the same engine as the daemon, printed as JSON or, with
 * --summary, as a table (engine's summary writer). With --server the
 * command goes to cli/remote.c instead (main.c decides).
 *
 * Exit status: 0 pass, 1 fail, 2 inconclusive, 3 usage or input error.
 * Thread use: the main thread; the check runs on its own pool.
 */
#include "cli/cli.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static void check_usage(FILE *f) {
  fprintf(f,
          "usage: feasgate check MODEL.json REQUEST.json [--samples N] "
          "[--seed S]\n"
          "                      [--exact auto|off|only] [--workers N] "
          "[--chunk N]\n"
          "                      [--summary] [--rows N]\n"
          "       feasgate check --server URL [--key KEY] [--timeout S] "
          "[--cacert FILE]\n"
          "                      [--summary] [--rows N] MODEL_NAME "
          "REQUEST.json\n"
          "Runs the check of REQUEST.json (the body of POST "
          "/v1/models/{name}/checks)\nagainst the model and prints the "
          "result as JSON, or with --summary as a\ntable (at most --rows N "
          "rows, default %d). --samples, --seed and --exact override\nthe "
          "request's (--exact only: no simulation, the verdict from the exact "
          "path);\n"
          "--workers defaults to the processors online, --chunk to %d\n"
          "(a multiple of %d from %d to %d). `feasgate check --server URL "
          "--help`\ndescribes the remote form. Exit status: 0 pass, 1 fail, "
          "2 inconclusive,\n3 usage or input error.\n",
          FG_SUMMARY_ROWS_DEFAULT, FG_CHUNK_DEFAULT, FG_BLOCK, FG_CHUNK_MIN,
          FG_CHUNK_MAX);
}

int fg_check_command(int argc, char **argv) {
  const char *files[2] = {NULL, NULL};
  int nfiles = 0;
  uint64_t samples = 0, seed = 0, workers = 0, chunk = FG_CHUNK_DEFAULT;
  uint64_t rows = FG_SUMMARY_ROWS_DEFAULT;
  bool has_samples = false, has_seed = false, summary = false;
  const char *exact = NULL;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i];
    if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
      check_usage(stdout);
      return 0;
    } else if (strcmp(a, "--rows") == 0 && i + 1 < argc) {
      if (!fg_cli_parse_u64(argv[++i], 1000000, &rows) || !rows) {
        fprintf(stderr, "feasgate check: --rows: expected a whole number "
                        "from 1 to 1000000, found '%s'\n", argv[i]);
        return FG_EXIT_USAGE;
      }
    } else if (strcmp(a, "--samples") == 0 && i + 1 < argc) {
      if (!fg_cli_parse_u64(argv[++i], FG_MAX_SAMPLES_HARD, &samples) ||
          !samples) {
        fprintf(stderr, "feasgate check: --samples: expected a whole number "
                        "from 1 to %llu, found '%s'\n",
                (unsigned long long)FG_MAX_SAMPLES_HARD, argv[i]);
        return FG_EXIT_USAGE;
      }
      has_samples = true;
    } else if (strcmp(a, "--seed") == 0 && i + 1 < argc) {
      if (!fg_cli_parse_u64(argv[++i], FG_SEED_MAX, &seed)) {
        fprintf(stderr, "feasgate check: --seed: expected a whole number "
                        "from 0 to 2^53-1, found '%s'\n", argv[i]);
        return FG_EXIT_USAGE;
      }
      has_seed = true;
    } else if (strcmp(a, "--workers") == 0 && i + 1 < argc) {
      if (!fg_cli_parse_u64(argv[++i], FG_WORKERS_MAX, &workers) || !workers) {
        fprintf(stderr, "feasgate check: --workers: expected a whole number "
                        "from 1 to %d, found '%s'\n", FG_WORKERS_MAX, argv[i]);
        return FG_EXIT_USAGE;
      }
    } else if (strcmp(a, "--chunk") == 0 && i + 1 < argc) {
      if (!fg_cli_parse_u64(argv[++i], FG_CHUNK_MAX, &chunk) ||
          chunk < FG_CHUNK_MIN || chunk % FG_BLOCK) {
        fprintf(stderr, "feasgate check: --chunk: expected a multiple of %d "
                        "from %d to %d, found '%s'\n",
                FG_BLOCK, FG_CHUNK_MIN, FG_CHUNK_MAX, argv[i]);
        return FG_EXIT_USAGE;
      }
    } else if (strcmp(a, "--exact") == 0 && i + 1 < argc) {
      exact = argv[++i];
      if (strcmp(exact, "auto") && strcmp(exact, "off") &&
          strcmp(exact, "only")) {
        fprintf(stderr, "feasgate check: --exact: expected auto, off or only, "
                        "found '%s'\n", exact);
        return FG_EXIT_USAGE;
      }
    } else if (strcmp(a, "--summary") == 0) {
      summary = true;
    } else if (a[0] == '-' && a[1]) {
      bool known = !strcmp(a, "--samples") || !strcmp(a, "--seed") ||
                   !strcmp(a, "--workers") || !strcmp(a, "--chunk") ||
                   !strcmp(a, "--rows") || !strcmp(a, "--exact");
      fprintf(stderr, "feasgate check: %s: %s (see feasgate check --help)\n",
              a, known ? "expected a value after it" : "unknown option");
      return FG_EXIT_USAGE;
    } else if (nfiles < 2) {
      files[nfiles++] = a;
    } else {
      fprintf(stderr, "feasgate check: too many arguments ('%s')\n", a);
      return FG_EXIT_USAGE;
    }
  }
  if (nfiles != 2) {
    fprintf(stderr, "feasgate check: expected MODEL.json and REQUEST.json, "
                    "found %d file%s\n", nfiles, nfiles == 1 ? "" : "s");
    check_usage(stderr);
    return FG_EXIT_USAGE;
  }
  if (workers == 0) {
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    workers = n > 0 ? (uint64_t)n : 1;
    if (workers > FG_WORKERS_MAX) workers = FG_WORKERS_MAX;
  }
  fg_model *m = fg_cli_load_model(files[0]);
  if (!m) return FG_EXIT_USAGE;
  size_t len;
  char *text = fg_cli_read_file(files[1], &len);
  if (!text) {
    fg_model_unref(m);
    return FG_EXIT_USAGE;
  }
  fg_problem p;
  fg_problem_init(&p);
  cJSON *body = NULL;
  fg_check_request req;
  fg_request_limits lim;
  fg_request_limits_default(&lim);
  lim.max_samples = FG_MAX_SAMPLES_HARD;
  lim.max_wait_s = 1e9;
  int rc = FG_EXIT_USAGE;
  if (fg_json_parse(text, len, &body, &p) != FG_OK) {
    fg_cli_print_problem(files[1], &p, text, len);
    goto out;
  }
  if (has_samples) {
    cJSON_DeleteItemFromObject(body, "samples");
    cJSON_AddNumberToObject(body, "samples", (double)samples);
  }
  if (has_seed) {
    cJSON_DeleteItemFromObject(body, "seed");
    cJSON_AddNumberToObject(body, "seed", (double)seed);
  }
  if (exact && cJSON_IsObject(body)) {
    cJSON_DeleteItemFromObject(body, "exact");
    cJSON_AddStringToObject(body, "exact", exact);
  }
  if (fg_request_parse(m, body, &lim, &req, &p) != FG_OK) {
    fg_cli_print_problem(files[1], &p, NULL, 0);
    goto out;
  }
  if (req.expect_digest[0] && strcmp(req.expect_digest, m->digest) != 0) {
    fprintf(stderr, "feasgate check: expect_digest %s does not match the "
                    "model's digest %s\n", req.expect_digest, m->digest);
    fg_request_free(&req);
    goto out;
  }
  if (!req.seed_given) req.seed = fg_seed_draw();
  char created[32], finished[32];
  fg_time_now_rfc3339(created, sizeof created);
  fg_check *c = NULL;
  if (fg_check_run_sync(m, &req, (int)workers, (int)chunk, &c, &p) != FG_OK) {
    fg_cli_print_problem("check", &p, NULL, 0);
    fg_request_free(&req);
    goto out;
  }
  fg_time_now_rfc3339(finished, sizeof finished);
  fg_check_meta meta = {.created_at = created, .finished_at = finished};
  cJSON *res = fg_check_result_json(c, &meta);
  if (summary) {
    fg_summary_print(stdout, res, (int)rows);
  } else {
    char *s = cJSON_Print(res);
    if (s) puts(s);
    free(s);
  }
  cJSON_Delete(res);
  rc = fg_check_get_state(c) == FG_CHECK_DONE ? (int)fg_check_get_verdict(c)
                                              : FG_EXIT_USAGE;
  fg_check_unref(c);
  fg_request_free(&req);
out:
  cJSON_Delete(body);
  free(text);
  fg_model_unref(m);
  return rc;
}
