/*
 * cli/explain.c -- `feasgate explain MODEL.json REQUEST.json --index I`:
 * sample I of the check REQUEST.json describes (its "seed" is needed),
 * recomputed offline: the inputs drawn, the definitions and every row's
 * excess, as JSON (engine/explain.c; the same answer as
 * GET /v1/checks/{id}/scenarios/{index}, without "check").
 *
 * Exit status: 0 printed, 3 usage or invalid input.
 * Thread use: the main thread.
 */
#include "cli/cli.h"

#include <cjson/cJSON.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char usage_text[] =
    "usage: feasgate explain MODEL.json REQUEST.json --index I\n"
    "Prints sample I of the check REQUEST.json describes (its "
    "\"seed\" is needed):\nthe inputs drawn, the definitions and "
    "every row's excess, as JSON.\n";

int fg_explain_command(int argc, char **argv) {
  const char *files[2] = {NULL, NULL};
  int nfiles = 0;
  const char *index_text = NULL;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--help") == 0) {
      fputs(usage_text, stdout);
      return 0;
    }
    if (strcmp(argv[i], "--index") == 0 && i + 1 < argc) {
      index_text = argv[++i];
    } else if (argv[i][0] == '-' && argv[i][1]) {
      fprintf(stderr, "feasgate explain: unknown or incomplete option "
                      "'%s'\n", argv[i]);
      nfiles = -1;
      break;
    } else if (nfiles < 2) {
      files[nfiles++] = argv[i];
    } else {
      nfiles = -1;
      break;
    }
  }
  uint64_t index = 0;
  if (nfiles != 2 || !index_text ||
      !fg_explain_parse_index(index_text, &index)) {
    fputs(usage_text, stderr);
    return 3;
  }
  int rc = 3;
  size_t mlen = 0, rlen = 0;
  char *mtext = fg_cli_read_file(files[0], &mlen), *rtext = NULL;
  fg_model *m = NULL;
  cJSON *body = NULL, *res = NULL;
  fg_check_request req;
  bool have_req = false;
  fg_problem p;
  fg_problem_init(&p);
  if (!mtext) goto out;
  if (fg_model_compile(mtext, mlen, &m, &p) != FG_OK) {
    fg_cli_print_problem(files[0], &p, mtext, mlen);
    goto out;
  }
  rtext = fg_cli_read_file(files[1], &rlen);
  if (!rtext) goto out;
  if (fg_json_parse(rtext, rlen, &body, &p) != FG_OK) {
    fg_cli_print_problem(files[1], &p, rtext, rlen);
    goto out;
  }
  fg_request_limits lim;
  fg_replay_limits(&lim);
  if (fg_request_parse(m, body, &lim, &req, &p) != FG_OK) {
    fg_cli_print_problem(files[1], &p, NULL, 0);
    goto out;
  }
  have_req = true;
  if (!req.seed_given) {
    fprintf(stderr, "feasgate explain: %s has no \"seed\"; a scenario is "
                    "defined by the seed the check ran with\n", files[1]);
    goto out;
  }
  if (fg_explain_scenario(m, &req, index, &res, &p) != FG_OK) {
    fg_cli_print_problem("explain", &p, NULL, 0);
    goto out;
  }
  char *s = cJSON_Print(res);
  if (s) {
    puts(s);
    rc = 0;
  }
  free(s);
out:
  cJSON_Delete(res);
  if (have_req) fg_request_free(&req);
  cJSON_Delete(body);
  if (m) fg_model_unref(m);
  free(rtext);
  free(mtext);
  return rc;
}
