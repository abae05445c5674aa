/*
 * cli/summary.c -- what the command line shows a person: the
 * `check --summary` table (offline and with --server) and the line and
 * column of a malformed JSON file.
 *
 * Design: the table is read from the result body (the same JSON the
 * daemon answers), so the offline and remote gates print the same thing.
 * Each excess column names its basis: the mean over all samples (0 where
 * the row holds) or over the samples that violate the row; `sole` counts
 * the samples in which this row alone fails. The table prints at most
 * `max_rows` rows and then says how many it left out.
 *
 * Thread use: any thread; writes only to the FILE given.
 */
#include "cli/cli.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

void fg_text_position(const char *text, size_t len, long long offset,
                      int *line, int *column) {
  int l = 1, c = 1;
  if (offset < 0) offset = 0;
  if ((unsigned long long)offset > len) offset = (long long)len;
  for (long long i = 0; i < offset; i++) {
    unsigned char ch = (unsigned char)text[i];
    if (ch == '\n') {
      l++;
      c = 1;
    } else if ((ch & 0xC0) != 0x80) {
      c++; /* count characters, not UTF-8 continuation bytes */
    }
  }
  *line = l;
  *column = c;
}

static const char *str(const cJSON *o, const char *k) {
  const char *s = cJSON_GetStringValue(cJSON_GetObjectItem(o, k));
  return s ? s : "?";
}

static double num(const cJSON *o, const char *k) {
  const cJSON *v = cJSON_GetObjectItem(o, k);
  return cJSON_IsNumber(v) ? v->valuedouble : NAN;
}

/* A number cell: "-" for null (a row never violated). */
static void cell(char *out, size_t cap, const cJSON *o, const char *k) {
  const cJSON *v = cJSON_GetObjectItem(o, k);
  if (cJSON_IsNumber(v)) snprintf(out, cap, "%.4g", v->valuedouble);
  else snprintf(out, cap, "-");
}

void fg_summary_print(FILE *f, const cJSON *res, int max_rows) {
  const cJSON *j = cJSON_GetObjectItem(res, "joint");
  const cJSON *iv = cJSON_GetObjectItem(j, "interval");
  const cJSON *model = cJSON_GetObjectItem(res, "model");
  const cJSON *v = cJSON_GetObjectItem(model, "version");
  fprintf(f, "verdict    %s\n", str(res, "verdict"));
  fprintf(f, "joint      %.6f  [%.6f, %.6f] %s  target %.4g at %.4g "
             "confidence\n",
          num(j, "probability"), num(iv, "lower"), num(iv, "upper"),
          str(iv, "method"), num(res, "target"), num(res, "confidence"));
  /* The seed is written as integer text (a raw item), not a double. */
  const cJSON *seed = cJSON_GetObjectItem(res, "seed");
  char seedtxt[32];
  if (cJSON_IsRaw(seed)) snprintf(seedtxt, sizeof seedtxt, "%s",
                                  seed->valuestring);
  else if (cJSON_IsNumber(seed)) snprintf(seedtxt, sizeof seedtxt, "%.0f",
                                          seed->valuedouble);
  else snprintf(seedtxt, sizeof seedtxt, "?");
  fprintf(f, "samples    %.0f satisfied of %.0f, seed %s%s\n",
          num(j, "satisfied"), num(j, "samples"), seedtxt,
          cJSON_IsTrue(cJSON_GetObjectItem(res, "stopped_early"))
              ? ", stopped early"
              : "");
  const cJSON *jx = cJSON_GetObjectItem(j, "exact");
  if (cJSON_IsNumber(cJSON_GetObjectItem(jx, "probability")))
    fprintf(f, "exact      %.6f +- %.2g (%s)%s\n", num(jx, "probability"),
            num(jx, "error"), str(jx, "method"),
            strcmp(str(res, "exact"), "only") == 0
                ? ", the verdict's basis: no samples drawn"
                : "");
  else if (cJSON_GetStringValue(cJSON_GetObjectItem(jx, "not_applicable")))
    fprintf(f, "exact      not applicable: %s\n",
            str(jx, "not_applicable"));
  const cJSON *settle = cJSON_GetObjectItem(res, "samples_to_settle");
  if (cJSON_IsNumber(settle))
    fprintf(f, "settle     about %.0f samples in all would settle the "
               "verdict if the estimate held\n",
            settle->valuedouble);
  if (cJSON_IsNumber(v))
    fprintf(f, "model      %s version %.0f (%s)\n", str(model, "name"),
            v->valuedouble, str(model, "digest"));
  else
    fprintf(f, "model      %s (%s)\n", str(model, "name"),
            str(model, "digest"));
  const cJSON *pr;
  cJSON_ArrayForEach(pr, cJSON_GetObjectItem(
                             cJSON_GetObjectItem(res, "deterministic"),
                             "problems"))
    fprintf(f, "problem    %s\n", str(pr, "message"));
  cJSON_ArrayForEach(pr, cJSON_GetObjectItem(
                             cJSON_GetObjectItem(res, "numeric"), "problems"))
    fprintf(f, "numeric    %s\n", str(pr, "message"));

  const cJSON *rows = cJSON_GetObjectItem(res, "constraints");
  int total = cJSON_GetArraySize(rows), shown = 0;
  fprintf(f, "\n%-28s %12s %10s %13s %13s %13s %12s\n", "row (worst first)",
          "P(violated)", "sole", "mean excess", "mean excess", "p95 excess",
          "max excess");
  fprintf(f, "%-28s %12s %10s %13s %13s %13s\n", "", "", "",
          "(all samples)", "(if violated)", "(if violated)");
  const cJSON *r;
  cJSON_ArrayForEach(r, rows) {
    if (shown >= max_rows) break;
    shown++;
    const cJSON *ex = cJSON_GetObjectItem(r, "excess");
    char mean[32], mif[32], p95[32], mx[32];
    cell(mean, sizeof mean, ex, "mean");
    cell(mif, sizeof mif, ex, "mean_if_violated");
    cell(p95, sizeof p95, ex, "p95");
    cell(mx, sizeof mx, ex, "max");
    fprintf(f, "%-28s %12.6f %10.0f %13s %13s %13s %12s\n", str(r, "name"),
            num(r, "probability"), num(r, "sole_cause"), mean, mif, p95, mx);
  }
  if (shown < total)
    fprintf(f, "... %d more row%s not shown (--rows N shows more; the JSON "
               "result lists every row)\n",
            total - shown, total - shown == 1 ? "" : "s");
  fprintf(f, "\nsole: samples in which this row alone fails. excess: by how "
             "much a sample\nmisses the row's comparison (0 where the row "
             "holds).\n");
  const cJSON *obj = cJSON_GetObjectItem(res, "objective");
  if (cJSON_IsNumber(obj))
    fprintf(f, "\nobjective  %.6g (mean over the samples)\n",
            obj->valuedouble);
}
