/*
 * cli/sizes.c -- `feasgate sample-size`: the samples or scenarios a
 * question needs (estimate/sizes.c computes, estimate/sizes_json.c writes
 * the same body GET /v1/sample-size answers); query names are shown with
 * the flag's spelling.
 *
 * Thread use: the main thread.
 */
#include "cli/cli.h"
#include "estimate/estimate.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

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

int fg_sample_size_command(int argc, char **argv) {
  char names[FG_CLI_SIZE_ARGS_MAX][32];
  const char *np[FG_CLI_SIZE_ARGS_MAX], *vp[FG_CLI_SIZE_ARGS_MAX];
  const char *flags[FG_CLI_SIZE_ARGS_MAX];
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
      return FG_EXIT_USAGE;
    }
    if (n >= FG_CLI_SIZE_ARGS_MAX) {
      fprintf(stderr, "feasgate sample-size: more than %d parameters\n",
              FG_CLI_SIZE_ARGS_MAX);
      return FG_EXIT_USAGE;
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
    return FG_EXIT_USAGE;
  }
  char *s = cJSON_Print(res);
  if (s) puts(s);
  free(s);
  cJSON_Delete(res);
  return s ? 0 : 1;
}
