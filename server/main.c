/*
 * main.c -- the feasgate command line: usage and dispatch (the commands
 * are in cli/, `serve` in http/).
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
 *            --scenarios S [--seed N] [--form all]  MPS (cli/samplemodel.c)
 *   feasgate sample-size --half-width H ...    sample sizes (estimate/sizes.c)
 *   feasgate check --server URL [--key KEY]    the same gate run by a daemon
 *            MODEL_NAME REQUEST.json           (cli/remote.c)
 *   feasgate keys add|list|revoke ...          API keys (cli/keys.c)
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
#include "cli/cli.h"
#include "http/http.h"

#include <stdio.h>
#include <string.h>

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

static void version_usage(FILE *f) {
  fprintf(f, "usage: feasgate version\nPrints the program's version.\n");
}

/* `check --server ...` is the remote form (cli/remote.c). */
static int check_either(int argc, char **argv) {
  for (int i = 1; i < argc; i++)
    if (strcmp(argv[i], "--server") == 0 ||
        strncmp(argv[i], "--server=", 9) == 0)
      return fg_remote_check_command(argc, argv);
  return fg_check_command(argc, argv);
}

/* Every command but version and help: a new command is one line here
 * (and one in usage()). */
static const struct {
  const char *name;
  int (*run)(int argc, char **argv);
} commands[] = {
    {"serve", fg_serve_command},
    {"check", check_either},
    {"validate", fg_validate_command},
    {"explain", fg_explain_command},
    {"replay", fg_replay_command},
    {"register", fg_register_command},
    {"scenarios", fg_scenarios_command},
    {"sample-model", fg_sample_model_command},
    {"sample-size", fg_sample_size_command},
    {"keys", fg_keys_command},
};

int main(int argc, char **argv) {
  if (argc < 2) {
    usage(stderr);
    return FG_EXIT_USAGE;
  }
  const char *cmd = argv[1];
  for (size_t i = 0; i < sizeof commands / sizeof *commands; i++)
    if (strcmp(cmd, commands[i].name) == 0)
      return commands[i].run(argc - 1, argv + 1);
  if (strcmp(cmd, "version") == 0 || strcmp(cmd, "--version") == 0) {
    if (argc > 2 && (strcmp(argv[2], "--help") == 0 ||
                     strcmp(argv[2], "-h") == 0)) {
      version_usage(stdout);
      return 0;
    }
    if (argc > 2) {
      fprintf(stderr, "feasgate version: %s: unknown argument\n", argv[2]);
      return FG_EXIT_USAGE;
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
  return FG_EXIT_USAGE;
}
