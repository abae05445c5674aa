/*
 * cli/replay.c -- `feasgate replay --store STORE ID`: a logged check's
 * request re-run on its model version, on this machine, and compared
 * count by count with the stored result (http/replay.c holds the
 * comparison and the answer's shape, shared with POST
 * /v1/checks/{id}/replay).
 *
 * Exit status: 0 every count reproduced, 1 not, 3 usage or input faults.
 * Thread use: the main thread; the check runs on its own pool.
 */
#include "cli/cli.h"
#include "store/store.h"

#include <cjson/cJSON.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* FEASGATE_STORE stands in for --store. */
static const char usage_text[] =
    "usage: feasgate replay --store STORE CHECK_ID\n"
    "Re-runs a logged check's request on its model version and prints "
    "whether\nevery count is reproduced (exit 0) or not (exit 1).\n";

int fg_replay_command(int argc, char **argv) {
  const char *url = getenv("FEASGATE_STORE"), *id = NULL;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--help") == 0) {
      fputs(usage_text, stdout);
      return 0;
    }
    if (strcmp(argv[i], "--store") == 0 && i + 1 < argc) url = argv[++i];
    else if (!id && argv[i][0] != '-') id = argv[i];
    else id = NULL, url = NULL, i = argc;
  }
  if (!url || !id) {
    fputs(usage_text, stderr);
    return 3;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store *st = NULL;
  if (fg_store_open(url, &st, &p) != FG_OK) {
    char shown[4200];
    fg_store_url_display(url, shown, sizeof shown);
    fg_cli_print_problem(shown, &p, NULL, 0);
    return 3;
  }
  int rc = 3;
  fg_replay_source src;
  fg_check *chk = NULL;
  if (fg_replay_load(NULL, st, id, &src, &p) != FG_OK) {
    fg_cli_print_problem(id, &p, NULL, 0);
    goto out;
  }
  long ncpu = sysconf(_SC_NPROCESSORS_ONLN);
  int workers = ncpu < 1 ? 1 : ncpu > FG_WORKERS_MAX ? FG_WORKERS_MAX
                                                     : (int)ncpu;
  if (fg_check_run_sync(src.model, &src.req, workers, FG_CHUNK_DEFAULT, &chk, &p) !=
      FG_OK) {
    fg_cli_print_problem(id, &p, NULL, 0);
    goto out;
  }
  char now[32];
  fg_time_now_rfc3339(now, sizeof now);
  fg_check_meta meta = {.model_version = src.check.version,
                        .created_at = now,
                        .finished_at = now,
                        .replay_of = src.check.id};
  cJSON *res = fg_replay_answer(src.check.id, NULL, src.orig,
                                fg_check_result_json(chk, &meta), true);
  char *s = cJSON_Print(res);
  if (s) puts(s);
  free(s);
  rc = cJSON_IsTrue(cJSON_GetObjectItem(res, "reproduced")) ? 0 : 1;
  cJSON_Delete(res);
out:
  fg_check_unref(chk);
  fg_replay_source_clear(&src);
  fg_store_close(st);
  return rc;
}
