/*
 * http/samplemodels.c -- the scenario model for a team's own solver:
 *
 *   POST /v1/models/{name}/sample-models
 *        {"scenarios": 200, "seed": 7, "form": "indicator", "target": 0.9}
 *
 * Built by fg_sample_model_build (engine/samplemodel.c) on the same design
 * scenarios GET .../scenarios hands out for the seed, as `feasgate
 * sample-model` (cli/samplemodel.c) builds it, so the daemon and the
 * offline command write the same text. The daemon answers
 * the JSON {"format": "mps", "text", "columns", "rows", "scenarios",
 * "seed", "form", "big_m", "guarantee", ...} or, when the Accept header
 * prefers text/plain, the MPS text alone.
 *
 * Errors: 400 for a malformed body (JSON Pointer named) or a size limit
 * (sample_model_*, in GET /v1/limits); 422 when the model cannot be
 * written as a mixed-integer program: a row not affine in the decisions
 * (the row and its term named), a decision without the bound a big-M
 * needs, a model without decisions; 404 / 410 for an unknown or retired
 * model.
 *
 * Thread use: the handler builds on the request's own libmicrohttpd
 * thread, bounded by the sample_model_* limits (about a second of work at
 * most), holding no lock.
 */
#include "feasgate/samplemodel.h"
#include "http/http_internal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define FG_CT_TEXT "text/plain; charset=utf-8"

void fg_h_model_sample_models(fg_req *r, fg_resp *out) {
  fg_server *srv = r->srv;
  fg_problem p;
  fg_problem_init(&p);
  fg_store_version v;
  fg_model *m = NULL;
  cJSON *body = NULL, *answer = NULL;
  char *text = NULL;
  size_t len = 0;
  if (fg_http_load_model(srv, r->params[0], 0, &v, &m, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    return;
  }
  fg_sample_model_request q;
  if (v.retired) {
    fg_resp_error(out, 410, FG_EGONE,
                  "model '%s' is retired; register it again to export its "
                  "scenario model",
                  v.name);
    goto done;
  }
  if (!r->body || r->len == 0) {
    fg_problem_add(&p, FG_EINVAL, "", 0,
                   "expected a sample-model request object with at least "
                   "\"scenarios\", found an empty body");
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (fg_json_parse(r->body, r->len, &body, &p) != FG_OK ||
      fg_sample_model_parse(m, body, &q, &p) != FG_OK) {
    fg_resp_problem(out, &p, 0);
    goto done;
  }
  if (!q.seed_given) q.seed = fg_seed_draw();
  if (fg_sample_model_build(m, &q, &answer, &text, &len, &p) != FG_OK) {
    fg_resp_problem(out, &p, p.status == FG_EUNSUPPORTED ? 422 : 0);
    goto done;
  }
  if (fg_http_accept_prefers(
          MHD_lookup_connection_value(r->conn, MHD_HEADER_KIND, "Accept"),
          "text/plain")) {
    out->status = 200;
    out->content_type = FG_CT_TEXT;
    out->body = text;
    out->len = len;
    text = NULL;
  } else if (!cJSON_AddStringToObject(answer, "text", text)) {
    fg_resp_error(out, 503, FG_ENOMEM, "out of memory for the answer");
  } else {
    fg_resp_json(out, 200, answer);
    answer = NULL;
  }
done:
  free(text);
  cJSON_Delete(answer);
  cJSON_Delete(body);
  fg_store_version_clear(&v);
  fg_model_unref(m);
}
