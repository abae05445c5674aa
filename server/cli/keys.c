/*
 * cli/keys.c -- `feasgate keys add|list|revoke`: API keys on a store.
 *
 *   feasgate keys add NAME --role reader|checker|author|admin [--store URL]
 *   feasgate keys list [--store URL]
 *   feasgate keys revoke NAME [--store URL]
 *
 * --store defaults to FEASGATE_STORE. `add` prints the new key alone on
 * the last line of standard output: it is made here (keys.c), only its
 * salted hash goes to the store, and it is never shown again. `list` shows
 * name, role, created and revoked times, never a key or a hash. A running
 * daemon on the same store sees an added or revoked key within a second
 * (keys.c, its cache), so no restart is needed.
 *
 * Exit status: 0 done; 3 bad usage, an invalid name or role, a name that
 * exists already, an unknown or already revoked key; 1 the store failed.
 *
 * Thread use: main thread (a command top level).
 */
#include "cli/cli.h"
#include "store/store.h"

#include <cjson/cJSON.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define EXIT_USAGE 3

static void keys_usage(FILE *f) {
  fprintf(f,
          "usage:\n"
          "  feasgate keys add NAME --role reader|checker|author|admin "
          "[--store URL]\n"
          "  feasgate keys list [--store URL]\n"
          "  feasgate keys revoke NAME [--store URL]\n"
          "--store defaults to $FEASGATE_STORE. `add` prints the new key on "
          "the last line;\nit is shown only then. Roles nest: reader (GET), "
          "checker (+ checks,\ncomparisons, scenarios), author (+ register "
          "and retire models), admin.\n");
}

static int store_status(fg_status st) {
  return st == FG_ECONFLICT || st == FG_ENOTFOUND || st == FG_EINVAL
             ? EXIT_USAGE
             : 1;
}

static int keys_add(fg_store *store, const char *name, const char *role) {
  fg_store_key k;
  memset(&k, 0, sizeof k);
  snprintf(k.name, sizeof k.name, "%s", name);
  snprintf(k.role, sizeof k.role, "%s", role);
  char text[FG_KEY_TEXT_MAX + 1];
  fg_problem p;
  fg_problem_init(&p);
  fg_status st = fg_key_generate(text, sizeof text, &k, &p);
  if (st == FG_OK) st = fg_store_put_key(store, &k, &p);
  if (st != FG_OK) {
    fprintf(stderr, "feasgate keys add: %s\n", p.detail);
    return store_status(st);
  }
  printf("added key '%s' with role %s; it is shown only now:\n%s\n", name,
         role, text);
  memset(text, 0, sizeof text);
  return fflush(stdout) == 0 ? 0 : 1;
}

static int keys_list(fg_store *store) {
  fg_store_key *keys = NULL;
  int n = 0;
  fg_problem p;
  fg_problem_init(&p);
  fg_status st = fg_store_list_keys(store, false, &keys, &n, &p);
  if (st != FG_OK) {
    fprintf(stderr, "feasgate keys list: %s\n", p.detail);
    return store_status(st);
  }
  printf("%-32s %-8s %-21s %s\n", "name", "role", "created", "revoked");
  for (int i = 0; i < n; i++)
    printf("%-32s %-8s %-21s %s\n", keys[i].name, keys[i].role,
           keys[i].created_at, keys[i].revoked_at[0] ? keys[i].revoked_at : "-");
  free(keys);
  return 0;
}

static int keys_revoke(fg_store *store, const char *name) {
  fg_problem p;
  fg_problem_init(&p);
  fg_status st = fg_store_revoke_key(store, name, &p);
  if (st != FG_OK) {
    fprintf(stderr, "feasgate keys revoke: %s\n", p.detail);
    return store_status(st);
  }
  printf("revoked key '%s'\n", name);
  return 0;
}

int fg_keys_command(int argc, char **argv) {
  if (argc < 2 || strcmp(argv[1], "--help") == 0 ||
      strcmp(argv[1], "-h") == 0 || strcmp(argv[1], "help") == 0) {
    keys_usage(argc < 2 ? stderr : stdout);
    return argc < 2 ? EXIT_USAGE : 0;
  }
  for (int i = 2; i < argc; i++)
    if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
      keys_usage(stdout);
      return 0;
    }
  const char *action = argv[1];
  const char *url = getenv("FEASGATE_STORE");
  const char *name = NULL, *role = NULL;
  for (int i = 2; i < argc; i++) {
    const char *a = argv[i];
    if (strcmp(a, "--store") == 0 && i + 1 < argc) {
      url = argv[++i];
    } else if (strcmp(a, "--role") == 0 && i + 1 < argc) {
      role = argv[++i];
    } else if (a[0] == '-' && a[1]) {
      bool known = strcmp(a, "--store") == 0 || strcmp(a, "--role") == 0;
      fprintf(stderr, "feasgate keys: %s: %s\n", a,
              known ? "expected a value after it" : "unknown option");
      keys_usage(stderr);
      return EXIT_USAGE;
    } else if (!name) {
      name = a;
    } else {
      fprintf(stderr, "feasgate keys: too many arguments ('%s')\n", a);
      return EXIT_USAGE;
    }
  }
  bool is_add = strcmp(action, "add") == 0;
  bool is_list = strcmp(action, "list") == 0;
  bool is_revoke = strcmp(action, "revoke") == 0;
  if (!is_add && !is_list && !is_revoke) {
    fprintf(stderr, "feasgate keys: unknown action '%s'; expected add, list "
                    "or revoke\n", action);
    keys_usage(stderr);
    return EXIT_USAGE;
  }
  if (!url || !url[0]) {
    fprintf(stderr, "feasgate keys %s: no store: give --store sqlite:PATH (or "
                    "postgresql://...) or "
                    "set FEASGATE_STORE\n", action);
    return EXIT_USAGE;
  }
  if (is_list && name) {
    fprintf(stderr, "feasgate keys list: takes no name ('%s')\n", name);
    return EXIT_USAGE;
  }
  if (!is_list) {
    if (!name) {
      fprintf(stderr, "feasgate keys %s: a key NAME is required\n", action);
      keys_usage(stderr);
      return EXIT_USAGE;
    }
    if (!fg_key_name_valid(name)) {
      fprintf(stderr, "feasgate keys %s: expected a name of 1 to %d "
                      "characters [A-Za-z0-9][A-Za-z0-9_.-]*, found '%s'\n",
              action, FG_NAME_MAX, name);
      return EXIT_USAGE;
    }
  }
  if (is_add) {
    if (!role) {
      fprintf(stderr, "feasgate keys add: --role reader|checker|author|admin "
                      "is required\n");
      return EXIT_USAGE;
    }
    if (!fg_key_role_valid(role)) {
      fprintf(stderr, "feasgate keys add: --role: expected reader, checker, "
                      "author or admin, found '%s'\n", role);
      return EXIT_USAGE;
    }
  } else if (role) {
    fprintf(stderr, "feasgate keys %s: --role belongs to `keys add`\n",
            action);
    return EXIT_USAGE;
  }
  fg_problem p;
  fg_problem_init(&p);
  fg_store *store = NULL;
  if (fg_store_open(url, &store, &p) != FG_OK) {
    char shown[FG_HTTP_URL_MAX + 1];
    fg_store_url_display(url, shown, sizeof shown);
    fprintf(stderr, "feasgate keys %s: --store %s: %s\n", action, shown,
            p.detail);
    return p.status == FG_EINVAL ? EXIT_USAGE : 1;
  }
  int rc = is_add ? keys_add(store, name, role)
           : is_list ? keys_list(store)
                     : keys_revoke(store, name);
  fg_store_close(store);
  return rc;
}
