/*
 * cli/models.c -- model documents on the command line: `feasgate
 * validate` (checked as registration would, no store) and `feasgate
 * register` (added to a store as new versions).
 *
 * Thread use: the main thread.
 */
#include "cli/cli.h"
#include "store/store.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

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

int fg_register_command(int argc, char **argv) {
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
    return FG_EXIT_USAGE;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store *st;
  if (fg_store_open(url, &st, &p) != FG_OK) {
    char shown[4200];
    fg_store_url_display(url, shown, sizeof shown);
    fg_cli_print_problem(shown, &p, NULL, 0);
    return 1;
  }
  int rc = 0;
  for (int i = first; i < argc; i++) {
    fg_model *m = fg_cli_load_model(argv[i]);
    if (!m) {
      rc = FG_EXIT_USAGE;
      continue;
    }
    fg_store_version v = {0};
    bool created = false;
    fg_problem_init(&p);
    if (fg_store_put_version(st, m->name, m->digest, m->canonical, m->title, &v,
                             &created, &p) != FG_OK) {
      fg_cli_print_problem(argv[i], &p, NULL, 0);
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


int fg_validate_command(int argc, char **argv) {
  int nfiles = 0, rc = 0;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
      validate_usage(stdout);
      return 0;
    }
    if (argv[i][0] == '-' && argv[i][1]) {
      fprintf(stderr, "feasgate validate: %s: unknown option\n", argv[i]);
      validate_usage(stderr);
      return FG_EXIT_USAGE;
    }
  }
  for (int i = 1; i < argc; i++) {
    nfiles++;
    fg_model *m = fg_cli_load_model(argv[i]);
    if (!m) {
      rc = FG_EXIT_USAGE;
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
    return FG_EXIT_USAGE;
  }
  return rc;
}
