/*
 * main.c -- the feasgate command line.
 *
 *   feasgate serve [flags]                     the daemon (http/http.h)
 *   feasgate check MODEL.json REQUEST.json     one check offline, same engine
 *            [--samples N] [--seed S] [--workers N] [--chunk N] [--summary]
 *   feasgate register --store URL FILE...      add model documents to a store
 *   feasgate scenarios MODEL.json [--count N]  a model's scenarios, JSON or
 *            [--seed S] [--start I] [--stream design|validation] [--csv]
 *            [--max M]                         CSV (engine/scenarios.c)
 *   feasgate sample-size --half-width H ...    sample sizes (estimate/sizes.c)
 *   feasgate check --server URL [--key KEY]    the same gate run by a daemon
 *            MODEL_NAME REQUEST.json           (http/remote.c)
 *   feasgate keys add|list|revoke ...          API keys (http/keys_cli.c)
 *   feasgate version
 *
 * Exit status of `check`: 0 pass, 1 fail, 2 inconclusive, 3 usage or input
 * error, so a pipeline step can gate on it. Everything below main.c
 * reports errors through fg_status / fg_problem; only this file exits.
 */
#include "feasgate/engine.h"
#include "feasgate/model.h"
#include "http/http.h"
#include "store/store.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#define EXIT_USAGE 3

static void usage(FILE *f) {
  fprintf(f,
          "usage:\n"
          "  feasgate serve [--listen HOST:PORT] [--store URL] [--workers N] "
          "...\n"
          "  feasgate check MODEL.json REQUEST.json [--samples N] [--seed S]\n"
          "                 [--workers N] [--chunk N] [--summary]\n"
          "  feasgate check --server URL [--key KEY] [--timeout S] MODEL_NAME "
          "REQUEST.json\n"
          "  feasgate keys add NAME --role ROLE | list | revoke NAME "
          "[--store URL]\n"
          "  feasgate register --store URL FILE...\n"
          "  feasgate scenarios MODEL.json [--count N] [--seed S] [--start I]\n"
          "                 [--stream design|validation] [--csv] [--max M]\n"
          "  feasgate version\n"
          "`feasgate serve --help` lists the daemon's settings.\n");
}

/* Read a whole file (at most FG_MAX_BODY_HARD bytes). */
static char *read_file(const char *path, size_t *len) {
  FILE *f = strcmp(path, "-") == 0 ? stdin : fopen(path, "rb");
  if (!f) {
    fprintf(stderr, "feasgate: cannot open %s: %s\n", path, strerror(errno));
    return NULL;
  }
  size_t cap = 65536, n = 0;
  char *buf = malloc(cap + 1);
  while (buf) {
    size_t r = fread(buf + n, 1, cap - n, f);
    n += r;
    if (r == 0) break;
    if (n == cap) {
      if (cap >= FG_MAX_BODY_HARD) {
        fprintf(stderr, "feasgate: %s is larger than %u bytes\n", path,
                FG_MAX_BODY_HARD);
        free(buf);
        buf = NULL;
        break;
      }
      cap *= 2;
      char *nb = realloc(buf, cap + 1);
      if (!nb) {
        free(buf);
        buf = NULL;
      }
      buf = nb;
    }
  }
  if (f != stdin) fclose(f);
  if (!buf) return NULL;
  buf[n] = '\0';
  *len = n;
  return buf;
}

static void print_problem(const char *what, const fg_problem *p) {
  fprintf(stderr, "feasgate: %s: %s%s%s\n", what, p->title,
          p->detail[0] ? ": " : "", p->detail);
  for (int i = 0; i < p->nitems; i++) {
    const fg_problem_item *it = &p->items[i];
    if (it->column > 0)
      fprintf(stderr, "  %s (column %d): %s\n", it->pointer, it->column,
              it->message);
    else
      fprintf(stderr, "  %s: %s\n", it->pointer[0] ? it->pointer : "(body)",
              it->message);
  }
  if (p->dropped) fprintf(stderr, "  ... and %d more\n", p->dropped);
  if (p->byte_offset >= 0)
    fprintf(stderr, "  (at byte offset %lld)\n", p->byte_offset);
}

static bool parse_u64(const char *s, uint64_t max, uint64_t *out) {
  char *end;
  errno = 0;
  if (!s || !*s || *s == '-') return false;
  unsigned long long v = strtoull(s, &end, 10);
  if (errno || *end || v > max) return false;
  *out = v;
  return true;
}

static fg_model *load_model(const char *path) {
  size_t len;
  char *text = read_file(path, &len);
  if (!text) return NULL;
  fg_problem p;
  fg_problem_init(&p);
  fg_model *m = NULL;
  if (fg_model_compile(text, len, &m, &p) != FG_OK) {
    print_problem(path, &p);
    m = NULL;
  }
  free(text);
  return m;
}

static void print_summary(cJSON *res) {
  const cJSON *j = cJSON_GetObjectItem(res, "joint");
  const cJSON *iv = cJSON_GetObjectItem(j, "interval");
  const cJSON *model = cJSON_GetObjectItem(res, "model");
  printf("model      %s (%s)\n",
         cJSON_GetStringValue(cJSON_GetObjectItem(model, "name")),
         cJSON_GetStringValue(cJSON_GetObjectItem(model, "digest")));
  printf("verdict    %s\n",
         cJSON_GetStringValue(cJSON_GetObjectItem(res, "verdict")));
  printf("joint      %.6f  [%.6f, %.6f] %s  target %.4g at %.4g confidence\n",
         cJSON_GetNumberValue(cJSON_GetObjectItem(j, "probability")),
         cJSON_GetNumberValue(cJSON_GetObjectItem(iv, "lower")),
         cJSON_GetNumberValue(cJSON_GetObjectItem(iv, "upper")),
         cJSON_GetStringValue(cJSON_GetObjectItem(iv, "method")),
         cJSON_GetNumberValue(cJSON_GetObjectItem(res, "target")),
         cJSON_GetNumberValue(cJSON_GetObjectItem(res, "confidence")));
  /* The seed is written as integer text (a raw item), not a double. */
  const cJSON *seed = cJSON_GetObjectItem(res, "seed");
  printf("samples    %.0f satisfied of %.0f, seed %s\n",
         cJSON_GetNumberValue(cJSON_GetObjectItem(j, "satisfied")),
         cJSON_GetNumberValue(cJSON_GetObjectItem(j, "samples")),
         cJSON_IsRaw(seed) ? seed->valuestring : "?");
  const cJSON *det = cJSON_GetObjectItem(res, "deterministic");
  const cJSON *pr;
  cJSON_ArrayForEach(pr, cJSON_GetObjectItem(det, "problems"))
    printf("problem    %s\n",
           cJSON_GetStringValue(cJSON_GetObjectItem(pr, "message")));
  const cJSON *num = cJSON_GetObjectItem(res, "numeric");
  cJSON_ArrayForEach(pr, cJSON_GetObjectItem(num, "problems"))
    printf("numeric    %s\n",
           cJSON_GetStringValue(cJSON_GetObjectItem(pr, "message")));
  printf("\n%-28s %12s %10s %12s %12s %12s\n", "row (worst first)",
         "P(violated)", "sole", "mean excess", "p95 excess", "max excess");
  const cJSON *r;
  int shown = 0;
  cJSON_ArrayForEach(r, cJSON_GetObjectItem(res, "constraints")) {
    if (shown++ >= 20) break;
    const cJSON *ex = cJSON_GetObjectItem(r, "excess");
    char p95[32] = "-", mx[32] = "-";
    const cJSON *v95 = cJSON_GetObjectItem(ex, "p95");
    const cJSON *vmax = cJSON_GetObjectItem(ex, "max");
    if (cJSON_IsNumber(v95)) snprintf(p95, sizeof p95, "%.4g", v95->valuedouble);
    if (cJSON_IsNumber(vmax)) snprintf(mx, sizeof mx, "%.4g", vmax->valuedouble);
    printf("%-28s %12.6f %10.0f %12.4g %12s %12s\n",
           cJSON_GetStringValue(cJSON_GetObjectItem(r, "name")),
           cJSON_GetNumberValue(cJSON_GetObjectItem(r, "probability")),
           cJSON_GetNumberValue(cJSON_GetObjectItem(r, "sole_cause")),
           cJSON_GetNumberValue(cJSON_GetObjectItem(ex, "mean")), p95, mx);
  }
  const cJSON *obj = cJSON_GetObjectItem(res, "objective");
  if (cJSON_IsNumber(obj)) printf("\nobjective  %.6g\n", obj->valuedouble);
}

static int cmd_check(int argc, char **argv) {
  const char *files[2] = {NULL, NULL};
  int nfiles = 0;
  uint64_t samples = 0, seed = 0, workers = 0, chunk = FG_CHUNK_DEFAULT;
  bool has_samples = false, has_seed = false, summary = false;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i];
    if (strcmp(a, "--samples") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_MAX_SAMPLES_HARD, &samples) || !samples) {
        fprintf(stderr, "feasgate check: --samples expects 1 to %llu, found "
                        "'%s'\n",
                (unsigned long long)FG_MAX_SAMPLES_HARD, argv[i]);
        return EXIT_USAGE;
      }
      has_samples = true;
    } else if (strcmp(a, "--seed") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &seed)) {
        fprintf(stderr, "feasgate check: --seed expects 0 to 2^53-1, found "
                        "'%s'\n", argv[i]);
        return EXIT_USAGE;
      }
      has_seed = true;
    } else if (strcmp(a, "--workers") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_WORKERS_MAX, &workers) || !workers) {
        fprintf(stderr, "feasgate check: --workers expects 1 to %d, found "
                        "'%s'\n", FG_WORKERS_MAX, argv[i]);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--chunk") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_CHUNK_MAX, &chunk) || chunk < FG_CHUNK_MIN ||
          chunk % FG_BLOCK) {
        fprintf(stderr, "feasgate check: --chunk expects a multiple of %d "
                        "from %d to %d, found '%s'\n",
                FG_BLOCK, FG_CHUNK_MIN, FG_CHUNK_MAX, argv[i]);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--summary") == 0) {
      summary = true;
    } else if (a[0] == '-' && a[1]) {
      fprintf(stderr, "feasgate check: unknown or incomplete option '%s'\n", a);
      usage(stderr);
      return EXIT_USAGE;
    } else if (nfiles < 2) {
      files[nfiles++] = a;
    } else {
      fprintf(stderr, "feasgate check: too many arguments ('%s')\n", a);
      return EXIT_USAGE;
    }
  }
  if (nfiles != 2) {
    usage(stderr);
    return EXIT_USAGE;
  }
  if (workers == 0) {
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    workers = n > 0 ? (uint64_t)n : 1;
    if (workers > FG_WORKERS_MAX) workers = FG_WORKERS_MAX;
  }
  fg_model *m = load_model(files[0]);
  if (!m) return EXIT_USAGE;
  size_t len;
  char *text = read_file(files[1], &len);
  if (!text) {
    fg_model_unref(m);
    return EXIT_USAGE;
  }
  fg_problem p;
  fg_problem_init(&p);
  cJSON *body = NULL;
  fg_check_request req;
  fg_request_limits lim;
  fg_request_limits_default(&lim);
  lim.max_samples = FG_MAX_SAMPLES_HARD;
  lim.max_wait_s = 1e9;
  int rc = EXIT_USAGE;
  if (fg_json_parse(text, len, &body, &p) != FG_OK) {
    print_problem(files[1], &p);
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
  if (fg_request_parse(m, body, &lim, &req, &p) != FG_OK) {
    print_problem(files[1], &p);
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
    print_problem("check", &p);
    fg_request_free(&req);
    goto out;
  }
  fg_time_now_rfc3339(finished, sizeof finished);
  fg_check_meta meta = {.created_at = created, .finished_at = finished};
  cJSON *res = fg_check_result_json(c, &meta);
  if (summary) {
    print_summary(res);
  } else {
    char *s = cJSON_Print(res);
    if (s) puts(s);
    free(s);
  }
  cJSON_Delete(res);
  rc = fg_check_get_state(c) == FG_CHECK_DONE ? (int)fg_check_get_verdict(c)
                                              : EXIT_USAGE;
  fg_check_unref(c);
  fg_request_free(&req);
out:
  cJSON_Delete(body);
  free(text);
  fg_model_unref(m);
  return rc;
}

/* ---- feasgate scenarios ---- */

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

static int cmd_scenarios(int argc, char **argv) {
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
      if (!parse_u64(argv[++i], FG_SEED_MAX, &q.count) || !q.count) {
        fprintf(stderr, "feasgate scenarios: --count expects a whole number "
                        "from 1, found '%s'\n", v);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--seed") == 0 && v) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &q.seed)) {
        fprintf(stderr, "feasgate scenarios: --seed expects 0 to 2^53-1, "
                        "found '%s'\n", v);
        return EXIT_USAGE;
      }
      has_seed = true;
    } else if (strcmp(a, "--start") == 0 && v) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &q.start)) {
        fprintf(stderr, "feasgate scenarios: --start expects 0 to 2^53-1, "
                        "found '%s'\n", v);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--max") == 0 && v) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &max) || !max) {
        fprintf(stderr, "feasgate scenarios: --max expects a whole number "
                        "from 1, found '%s'\n", v);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--stream") == 0 && v) {
      i++;
      if (strcmp(v, "design") == 0) q.validation = false;
      else if (strcmp(v, "validation") == 0) q.validation = true;
      else {
        fprintf(stderr, "feasgate scenarios: --stream expects design or "
                        "validation, found '%s'\n", v);
        return EXIT_USAGE;
      }
    } else if (a[0] == '-' && a[1]) {
      fprintf(stderr, "feasgate scenarios: unknown or incomplete option "
                      "'%s'\n", a);
      scenarios_usage(stderr);
      return EXIT_USAGE;
    } else if (!file) {
      file = a;
    } else {
      fprintf(stderr, "feasgate scenarios: too many arguments ('%s')\n", a);
      return EXIT_USAGE;
    }
  }
  if (!file) {
    fprintf(stderr, "feasgate scenarios: a model file is required\n");
    scenarios_usage(stderr);
    return EXIT_USAGE;
  }
  if (q.count > max) {
    fprintf(stderr, "feasgate scenarios: --count %llu exceeds the cap of "
                    "%llu scenarios; give --max %llu to allow it\n",
            (unsigned long long)q.count, (unsigned long long)max,
            (unsigned long long)q.count);
    return EXIT_USAGE;
  }
  if (q.count > FG_SEED_MAX + 1 - q.start) {
    fprintf(stderr, "feasgate scenarios: --start %llu + --count %llu goes "
                    "beyond scenario index 2^53\n",
            (unsigned long long)q.start, (unsigned long long)q.count);
    return EXIT_USAGE;
  }
  if (!has_seed) {
    q.seed = fg_seed_draw();
    fprintf(stderr, "feasgate scenarios: seed %llu\n",
            (unsigned long long)q.seed);
  }
  fg_model *m = load_model(file);
  if (!m) return EXIT_USAGE;
  fg_problem p;
  fg_problem_init(&p);
  int rc = 0;
  if (fg_scenarios_write(m, &q, stdout_sink, stdout, &p) != FG_OK ||
      fflush(stdout) != 0) {
    print_problem("scenarios", &p);
    rc = 1;
  }
  fg_model_unref(m);
  return rc;
}

/* ---- feasgate sample-size ---- */

/* Parameters of one sample-size question at most (each --name value). */
#define SAMPLE_SIZE_ARGS_MAX 16

static void sample_size_usage(FILE *f) {
  fprintf(f,
          "usage: feasgate sample-size --half-width H --confidence C "
          "[--probability P]\n"
          "       feasgate sample-size --target T --probability P "
          "--confidence C --power Q\n"
          "       feasgate sample-size --epsilon E --beta B --decisions D "
          "[--discarded K]\n"
          "       feasgate sample-size --scenarios N --beta B --decisions D "
          "[--discarded K]\n"
          "Prints the same JSON as GET /v1/sample-size.\n");
}

static int cmd_sample_size(int argc, char **argv) {
  char names[SAMPLE_SIZE_ARGS_MAX][32];
  const char *np[SAMPLE_SIZE_ARGS_MAX], *vp[SAMPLE_SIZE_ARGS_MAX];
  int n = 0;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i];
    if (strcmp(a, "--help") == 0) {
      sample_size_usage(stdout);
      return 0;
    }
    if (strncmp(a, "--", 2) != 0 || !a[2] || i + 1 >= argc ||
        strlen(a + 2) >= sizeof names[0]) {
      fprintf(stderr, "feasgate sample-size: expected --name value pairs, "
                      "found '%s'\n", a);
      sample_size_usage(stderr);
      return EXIT_USAGE;
    }
    if (n >= SAMPLE_SIZE_ARGS_MAX) {
      fprintf(stderr, "feasgate sample-size: more than %d parameters\n",
              SAMPLE_SIZE_ARGS_MAX);
      return EXIT_USAGE;
    }
    /* --half-width -> half_width, the query parameter's name. */
    snprintf(names[n], sizeof names[n], "%s", a + 2);
    for (char *c = names[n]; *c; c++)
      if (*c == '-') *c = '_';
    np[n] = names[n];
    vp[n] = argv[++i];
    n++;
  }
  fg_problem p;
  fg_problem_init(&p);
  cJSON *res = NULL;
  if (fg_sample_size_json(n, np, vp, &res, &p) != FG_OK) {
    print_problem("sample-size", &p);
    return EXIT_USAGE;
  }
  char *s = cJSON_Print(res);
  if (s) puts(s);
  free(s);
  cJSON_Delete(res);
  return s ? 0 : 1;
}

static int cmd_register(int argc, char **argv) {
  const char *url = getenv("FEASGATE_STORE");
  int first = 1;
  for (; first < argc; first++) {
    if (strcmp(argv[first], "--store") == 0 && first + 1 < argc)
      url = argv[++first];
    else break;
  }
  if (!url || first >= argc) {
    fprintf(stderr, "usage: feasgate register --store URL FILE...\n");
    return EXIT_USAGE;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store *st;
  if (fg_store_open(url, &st, &p) != FG_OK) {
    char shown[4200];
    fg_store_url_display(url, shown, sizeof shown);
    print_problem(shown, &p);
    return 1;
  }
  int rc = 0;
  for (int i = first; i < argc; i++) {
    fg_model *m = load_model(argv[i]);
    if (!m) {
      rc = EXIT_USAGE;
      continue;
    }
    fg_store_version v = {0};
    bool created = false;
    fg_problem_init(&p);
    if (fg_store_put_version(st, m->name, m->digest, m->canonical, m->title, &v,
                             &created, &p) != FG_OK) {
      print_problem(argv[i], &p);
      rc = 1;
    } else {
      printf("%s %s version %d %s\n", created ? "registered" : "unchanged",
             v.name, v.version, v.digest);
    }
    fg_store_version_clear(&v);
    fg_model_unref(m);
  }
  fg_store_close(st);
  return rc;
}

int main(int argc, char **argv) {
  if (argc < 2) {
    usage(stderr);
    return EXIT_USAGE;
  }
  const char *cmd = argv[1];
  if (strcmp(cmd, "serve") == 0) return fg_serve_command(argc - 1, argv + 1);
  if (strcmp(cmd, "check") == 0) {
    for (int i = 2; i < argc; i++)
      if (strcmp(argv[i], "--server") == 0 ||
          strncmp(argv[i], "--server=", 9) == 0)
        return fg_remote_check_command(argc - 1, argv + 1);
    return cmd_check(argc - 1, argv + 1);
  }
  if (strcmp(cmd, "keys") == 0) return fg_keys_command(argc - 1, argv + 1);
  if (strcmp(cmd, "explain") == 0) return fg_explain_command(argc - 1, argv + 1);
  if (strcmp(cmd, "replay") == 0) return fg_replay_command(argc - 1, argv + 1);
  if (strcmp(cmd, "register") == 0) return cmd_register(argc - 1, argv + 1);
  if (strcmp(cmd, "scenarios") == 0) return cmd_scenarios(argc - 1, argv + 1);
  if (strcmp(cmd, "sample-size") == 0) return cmd_sample_size(argc - 1, argv + 1);
  if (strcmp(cmd, "version") == 0 || strcmp(cmd, "--version") == 0) {
    printf("feasgate 0.1.0\n");
    return 0;
  }
  if (strcmp(cmd, "help") == 0 || strcmp(cmd, "--help") == 0) {
    usage(stdout);
    return 0;
  }
  fprintf(stderr, "feasgate: unknown command '%s'\n", cmd);
  usage(stderr);
  return EXIT_USAGE;
}
