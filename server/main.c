/*
 * main.c -- the feasgate command line.
 *
 *   feasgate serve [flags]                     the daemon (http/http.h)
 *   feasgate check MODEL.json REQUEST.json     one check offline, same engine
 *            [--samples N] [--seed S] [--workers N] [--chunk N] [--summary]
 *            [--rows N]
 *   feasgate validate MODEL.json               a model document checked as
 *                                              registration would (no store)
 *   feasgate register --store URL FILE...      add model documents to a store
 *   feasgate scenarios MODEL.json [--count N]  a model's scenarios, JSON or
 *            [--seed S] [--start I] [--stream design|validation] [--csv]
 *            [--max M]                         CSV (engine/scenarios.c)
 *   feasgate sample-model MODEL.json           the scenario program in free
 *            --scenarios S [--seed N] [--form all]  MPS (http/samplemodels.c)
 *   feasgate sample-size --half-width H ...    sample sizes (estimate/sizes.c)
 *   feasgate check --server URL [--key KEY]    the same gate run by a daemon
 *            MODEL_NAME REQUEST.json           (http/remote.c)
 *   feasgate keys add|list|revoke ...          API keys (http/keys_cli.c)
 *   feasgate version
 *
 * Every command answers --help on standard output with exit status 0.
 * Option errors name the option as typed ("--samples: expected ...");
 * malformed JSON in a file is reported by line and column.
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
          "usage: feasgate COMMAND [options]\n\n"
          "commands:\n"
          "  serve        run the daemon (HTTP API)\n"
          "  check        judge a candidate: MODEL.json REQUEST.json offline,"
          "\n"
          "               or --server URL MODEL_NAME REQUEST.json on a daemon"
          "\n"
          "  validate     check a model document without running anything\n"
          "  explain      recompute one sample of a check: inputs, definitions,\n"
          "               each row's excess (MODEL.json REQUEST.json --index I)\n"
          "  replay       re-run a logged check and say whether it reproduces\n"
          "               (--store STORE ID)\n"
          "  register     add model documents to a store\n"
          "  scenarios    print a model's random scenarios (JSON or CSV)\n"
          "  sample-model write the scenario program for a solver (free MPS)\n"
          "  sample-size  samples or scenarios needed for a question\n"
          "  keys         add, list or revoke API keys in a store\n"
          "  version      print the version\n\n"
          "`feasgate COMMAND --help` describes one command. `check` exits 0 "
          "on pass,\n1 on fail, 2 when inconclusive, 3 on a usage or input "
          "error.\n");
}

static void check_usage(FILE *f) {
  fprintf(f,
          "usage: feasgate check MODEL.json REQUEST.json [--samples N] "
          "[--seed S]\n"
          "                      [--workers N] [--chunk N] [--summary] "
          "[--rows N]\n"
          "       feasgate check --server URL [--key KEY] [--timeout S] "
          "[--cacert FILE]\n"
          "                      [--summary] [--rows N] MODEL_NAME "
          "REQUEST.json\n"
          "Runs the check of REQUEST.json (the body of POST "
          "/v1/models/{name}/checks)\nagainst the model and prints the "
          "result as JSON, or with --summary as a\ntable (at most --rows N "
          "rows, default %d). --samples and --seed override\nthe request's; "
          "--workers defaults to the processors online, --chunk to %d\n"
          "(a multiple of %d from %d to %d). `feasgate check --server URL "
          "--help`\ndescribes the remote form. Exit status: 0 pass, 1 fail, "
          "2 inconclusive,\n3 usage or input error.\n",
          FG_SUMMARY_ROWS_DEFAULT, FG_CHUNK_DEFAULT, FG_BLOCK, FG_CHUNK_MIN,
          FG_CHUNK_MAX);
}

static void validate_usage(FILE *f) {
  fprintf(f,
          "usage: feasgate validate MODEL.json...\n"
          "Checks each model document as registration would (parsing, "
          "names, shapes,\nexpressions, distribution parameters) without a "
          "store or a daemon, and prints\nits name, digest and summary. "
          "Exit status: 0 all valid, 3 a document is\ninvalid (each problem "
          "is printed with its JSON Pointer).\n");
}

static void register_usage(FILE *f) {
  fprintf(f,
          "usage: feasgate register [--store URL] FILE...\n"
          "Adds each model document to the store (default $FEASGATE_STORE) "
          "as a new\nversion, or reports it unchanged when the latest "
          "version has the same digest.\nExit status: 0 done, 1 a store "
          "fault, 3 an invalid document or usage.\n");
}

static void version_usage(FILE *f) {
  fprintf(f, "usage: feasgate version\nPrints the program's version.\n");
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

/* `text`/`len`, when given, is the file the problem is about: a byte
 * offset into it is shown as line and column. */
static void print_problem(const char *what, const fg_problem *p,
                          const char *text, size_t len) {
  if (p->byte_offset >= 0 && text) {
    /* Malformed JSON: the file's line and column first, as an editor
     * shows them; the detail repeats the byte offset. */
    int line, col;
    fg_text_position(text, len, p->byte_offset, &line, &col);
    fprintf(stderr, "feasgate: %s: line %d, column %d: %s\n", what, line,
            col, p->detail[0] ? p->detail : p->title);
    return;
  }
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
  if (p->byte_offset >= 0) {
    fprintf(stderr, "  (at byte offset %lld)\n", p->byte_offset);
  }
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
    print_problem(path, &p, text, len);
    m = NULL;
  }
  free(text);
  return m;
}

static int cmd_check(int argc, char **argv) {
  const char *files[2] = {NULL, NULL};
  int nfiles = 0;
  uint64_t samples = 0, seed = 0, workers = 0, chunk = FG_CHUNK_DEFAULT;
  uint64_t rows = FG_SUMMARY_ROWS_DEFAULT;
  bool has_samples = false, has_seed = false, summary = false;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i];
    if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
      check_usage(stdout);
      return 0;
    } else if (strcmp(a, "--rows") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], 1000000, &rows) || !rows) {
        fprintf(stderr, "feasgate check: --rows: expected a whole number "
                        "from 1 to 1000000, found '%s'\n", argv[i]);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--samples") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_MAX_SAMPLES_HARD, &samples) || !samples) {
        fprintf(stderr, "feasgate check: --samples: expected a whole number "
                        "from 1 to %llu, found '%s'\n",
                (unsigned long long)FG_MAX_SAMPLES_HARD, argv[i]);
        return EXIT_USAGE;
      }
      has_samples = true;
    } else if (strcmp(a, "--seed") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &seed)) {
        fprintf(stderr, "feasgate check: --seed: expected a whole number "
                        "from 0 to 2^53-1, found '%s'\n", argv[i]);
        return EXIT_USAGE;
      }
      has_seed = true;
    } else if (strcmp(a, "--workers") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_WORKERS_MAX, &workers) || !workers) {
        fprintf(stderr, "feasgate check: --workers: expected a whole number "
                        "from 1 to %d, found '%s'\n", FG_WORKERS_MAX, argv[i]);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--chunk") == 0 && i + 1 < argc) {
      if (!parse_u64(argv[++i], FG_CHUNK_MAX, &chunk) || chunk < FG_CHUNK_MIN ||
          chunk % FG_BLOCK) {
        fprintf(stderr, "feasgate check: --chunk: expected a multiple of %d "
                        "from %d to %d, found '%s'\n",
                FG_BLOCK, FG_CHUNK_MIN, FG_CHUNK_MAX, argv[i]);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--summary") == 0) {
      summary = true;
    } else if (a[0] == '-' && a[1]) {
      bool known = !strcmp(a, "--samples") || !strcmp(a, "--seed") ||
                   !strcmp(a, "--workers") || !strcmp(a, "--chunk") ||
                   !strcmp(a, "--rows");
      fprintf(stderr, "feasgate check: %s: %s (see feasgate check --help)\n",
              a, known ? "expected a value after it" : "unknown option");
      return EXIT_USAGE;
    } else if (nfiles < 2) {
      files[nfiles++] = a;
    } else {
      fprintf(stderr, "feasgate check: too many arguments ('%s')\n", a);
      return EXIT_USAGE;
    }
  }
  if (nfiles != 2) {
    fprintf(stderr, "feasgate check: expected MODEL.json and REQUEST.json, "
                    "found %d file%s\n", nfiles, nfiles == 1 ? "" : "s");
    check_usage(stderr);
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
    print_problem(files[1], &p, text, len);
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
    print_problem(files[1], &p, NULL, 0);
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
    print_problem("check", &p, NULL, 0);
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
        fprintf(stderr, "feasgate scenarios: --count: expected a whole "
                        "number from 1, found '%s'\n", v);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--seed") == 0 && v) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &q.seed)) {
        fprintf(stderr, "feasgate scenarios: --seed: expected 0 to 2^53-1, "
                        "found '%s'\n", v);
        return EXIT_USAGE;
      }
      has_seed = true;
    } else if (strcmp(a, "--start") == 0 && v) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &q.start)) {
        fprintf(stderr, "feasgate scenarios: --start: expected 0 to "
                        "2^53-1, found '%s'\n", v);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--max") == 0 && v) {
      if (!parse_u64(argv[++i], FG_SEED_MAX, &max) || !max) {
        fprintf(stderr, "feasgate scenarios: --max: expected a whole number "
                        "from 1, found '%s'\n", v);
        return EXIT_USAGE;
      }
    } else if (strcmp(a, "--stream") == 0 && v) {
      i++;
      if (strcmp(v, "design") == 0) q.validation = false;
      else if (strcmp(v, "validation") == 0) q.validation = true;
      else {
        fprintf(stderr, "feasgate scenarios: --stream: expected design or "
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
    print_problem("scenarios", &p, NULL, 0);
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

/* Copy `msg`, writing "parameter 'half_width'" as "--half-width" and the
 * names in "(known: a, b_c)" as "--a, --b-c": the command line's spelling
 * of the query parameters the shared code names. */
static void flag_spelling(const char *msg, char *out, size_t cap) {
  size_t o = 0;
  bool in_known = false;
  for (const char *s = msg; *s && o + 3 < cap;) {
    const char *name = NULL;
    if (strncmp(s, "parameter '", 11) == 0) {
      name = s + 11;
    } else if (strncmp(s, "(known: ", 8) == 0) {
      memcpy(out + o, s, 8);
      o += 8;
      s += 8;
      in_known = true;
      continue;
    } else if (in_known && (s[0] >= 'a' && s[0] <= 'z') &&
               (s[-1] == ' ')) {
      name = s;
    }
    if (!name) {
      if (*s == ')') in_known = false;
      out[o++] = *s++;
      continue;
    }
    out[o++] = '-';
    out[o++] = '-';
    const char *e = name;
    while (*e && *e != '\'' && *e != ',' && *e != ')' && o + 2 < cap)
      out[o++] = *e == '_' ? '-' : *e, e++;
    s = *e == '\'' ? e + 1 : e;
  }
  out[o] = '\0';
}

static int cmd_sample_size(int argc, char **argv) {
  char names[SAMPLE_SIZE_ARGS_MAX][32];
  const char *np[SAMPLE_SIZE_ARGS_MAX], *vp[SAMPLE_SIZE_ARGS_MAX];
  const char *flags[SAMPLE_SIZE_ARGS_MAX];
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
    flags[n] = a;
    vp[n] = argv[++i];
    n++;
  }
  fg_problem p;
  fg_problem_init(&p);
  cJSON *res = NULL;
  if (fg_sample_size_json(n, np, vp, &res, &p) != FG_OK) {
    /* The messages name query parameters (half_width); say the flags. */
    for (int i = 0; i < p.nitems; i++) {
      char flagged[sizeof p.items[i].message];
      flag_spelling(p.items[i].message, flagged, sizeof flagged);
      if (strncmp(flagged, "unknown --", 10) == 0) {
        /* "unknown --x (known: ...)" -> "--x: unknown option (known: ...)" */
        size_t nl = strcspn(flagged + 8, " ");
        fprintf(stderr, "feasgate sample-size: %.*s: unknown option%s\n",
                (int)nl, flagged + 8, flagged + 8 + nl);
      } else {
        /* "half_width must be ..." -> "--half-width: must be ..." */
        int k = 0;
        while (k < n && !(strncmp(flagged, np[k], strlen(np[k])) == 0 &&
                          flagged[strlen(np[k])] == ' '))
          k++;
        if (k < n)
          fprintf(stderr, "feasgate sample-size: %s:%s\n", flags[k],
                  flagged + strlen(np[k]));
        else
          fprintf(stderr, "feasgate sample-size: %s\n", flagged);
      }
    }
    if (p.nitems == 0)
      fprintf(stderr, "feasgate sample-size: %s\n", p.detail);
    sample_size_usage(stderr);
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
  for (int i = 1; i < argc; i++)
    if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
      register_usage(stdout);
      return 0;
    }
  for (; first < argc; first++) {
    if (strcmp(argv[first], "--store") == 0 && first + 1 < argc)
      url = argv[++first];
    else break;
  }
  if (!url || first >= argc) {
    fprintf(stderr, "feasgate register: %s\n",
                    !url ? "--store: expected a store URL (or FEASGATE_STORE)"
                         : "expected at least one model file");
    register_usage(stderr);
    return EXIT_USAGE;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store *st;
  if (fg_store_open(url, &st, &p) != FG_OK) {
    char shown[4200];
    fg_store_url_display(url, shown, sizeof shown);
    print_problem(shown, &p, NULL, 0);
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
      print_problem(argv[i], &p, NULL, 0);
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

/* ---- feasgate validate ---- */

static int cmd_validate(int argc, char **argv) {
  int nfiles = 0, rc = 0;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
      validate_usage(stdout);
      return 0;
    }
    if (argv[i][0] == '-' && argv[i][1]) {
      fprintf(stderr, "feasgate validate: %s: unknown option\n", argv[i]);
      validate_usage(stderr);
      return EXIT_USAGE;
    }
  }
  for (int i = 1; i < argc; i++) {
    nfiles++;
    fg_model *m = load_model(argv[i]);
    if (!m) {
      rc = EXIT_USAGE;
      continue;
    }
    cJSON *sum = fg_model_summary_json(m);
    char *st = sum ? cJSON_PrintUnformatted(sum) : NULL;
    printf("%s: valid, model %s, %s\n  summary %s\n", argv[i], m->name,
           m->digest, st ? st : "?");
    free(st);
    cJSON_Delete(sum);
    fg_model_unref(m);
  }
  if (nfiles == 0) {
    fprintf(stderr, "feasgate validate: expected at least one model file\n");
    validate_usage(stderr);
    return EXIT_USAGE;
  }
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
  if (strcmp(cmd, "sample-model") == 0)
    return fg_sample_model_command(argc - 1, argv + 1);
  if (strcmp(cmd, "sample-size") == 0) return cmd_sample_size(argc - 1, argv + 1);
  if (strcmp(cmd, "validate") == 0) return cmd_validate(argc - 1, argv + 1);
  if (strcmp(cmd, "version") == 0 || strcmp(cmd, "--version") == 0) {
    if (argc > 2 && (strcmp(argv[2], "--help") == 0 ||
                     strcmp(argv[2], "-h") == 0)) {
      version_usage(stdout);
      return 0;
    }
    if (argc > 2) {
      fprintf(stderr, "feasgate version: %s: unknown argument\n", argv[2]);
      return EXIT_USAGE;
    }
    printf("feasgate 0.1.0\n");
    return 0;
  }
  if (strcmp(cmd, "help") == 0 || strcmp(cmd, "--help") == 0 ||
      strcmp(cmd, "-h") == 0) {
    usage(stdout);
    return 0;
  }
  fprintf(stderr, "feasgate: unknown command '%s'\n", cmd);
  usage(stderr);
  return EXIT_USAGE;
}
