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

int fg_replay_command(int argc, char **argv) {
  const char *url = getenv("FEASGATE_STORE"), *id = NULL;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--help") == 0) {
      printf("usage: feasgate replay --store STORE CHECK_ID\n"
             "Re-runs a logged check's request on its model version and "
             "prints whether\nevery count is reproduced (exit 0) or not "
             "(exit 1).\n");
      return 0;
    }
    if (strcmp(argv[i], "--store") == 0 && i + 1 < argc) url = argv[++i];
    else if (!id && argv[i][0] != '-') id = argv[i];
    else id = NULL, url = NULL, i = argc;
  }
  if (!url || !id) {
    fprintf(stderr,
            "usage: feasgate replay --store STORE CHECK_ID\n"
            "Re-runs a logged check's request on its model version and "
            "prints whether\nevery count is reproduced (exit 0) or not "
            "(exit 1).\n");
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
  fg_store_check c;
  memset(&c, 0, sizeof c);
  fg_store_version v;
  memset(&v, 0, sizeof v);
  fg_model *m = NULL;
  cJSON *body = NULL, *orig = NULL;
  fg_check_request req;
  bool have_req = false;
  fg_check *chk = NULL;
  if (fg_store_get_check(st, id, &c, &p) != FG_OK ||
      !fg_replay_has_counts(&c, &p) || !(orig = cJSON_Parse(c.result))) {
    if (!p.status) fg_problem_set(&p, FG_EINTERNAL, "unreadable result");
    fg_cli_print_problem(id, &p, NULL, 0);
    goto out;
  }
  if (fg_store_get_version(st, c.model, c.version, &v, &p) != FG_OK ||
      fg_model_compile(v.document, strlen(v.document), &m, &p) != FG_OK ||
      fg_json_parse(c.request, strlen(c.request), &body, &p) != FG_OK) {
    fg_cli_print_problem(id, &p, NULL, 0);
    goto out;
  }
  fg_request_limits lim;
  fg_replay_limits(&lim);
  if (fg_request_parse(m, body, &lim, &req, &p) != FG_OK) {
    fg_cli_print_problem(id, &p, NULL, 0);
    goto out;
  }
  have_req = true;
  req.seed = c.seed;
  req.seed_given = true;
  long ncpu = sysconf(_SC_NPROCESSORS_ONLN);
  int workers = ncpu < 1 ? 1 : ncpu > FG_WORKERS_MAX ? FG_WORKERS_MAX
                                                     : (int)ncpu;
  if (fg_check_run_sync(m, &req, workers, FG_CHUNK_DEFAULT, &chk, &p) !=
      FG_OK) {
    fg_cli_print_problem(id, &p, NULL, 0);
    goto out;
  }
  char now[32];
  fg_time_now_rfc3339(now, sizeof now);
  fg_check_meta meta = {.model_version = c.version,
                        .created_at = now,
                        .finished_at = now,
                        .replay_of = c.id};
  cJSON *res = fg_replay_answer(c.id, NULL, orig,
                                fg_check_result_json(chk, &meta), true);
  char *s = cJSON_Print(res);
  if (s) puts(s);
  free(s);
  rc = cJSON_IsTrue(cJSON_GetObjectItem(res, "reproduced")) ? 0 : 1;
  cJSON_Delete(res);
out:
  fg_check_unref(chk);
  if (have_req) fg_request_free(&req);
  cJSON_Delete(body);
  cJSON_Delete(orig);
  if (m) fg_model_unref(m);
  fg_store_version_clear(&v);
  fg_store_check_clear(&c);
  fg_store_close(st);
  return rc;
}
