/*
 * cli/cli.h -- the command line's commands (main.c dispatches on
 * argv[1]) and the pieces they share.
 *
 * Each command takes argv with argv[0] = its own name, answers --help on
 * standard output with exit status 0, names an option as it was typed in
 * its errors, and returns the process's exit status. Everything below
 * cli/ reports errors through fg_status / fg_problem; only cli/ prints and
 * only main.c exits. `feasgate serve` is the daemon itself and lives in
 * http/ (fg_serve_command, http/http.h).
 *
 * Thread use: the main thread of the process.
 */
#ifndef FG_CLI_H
#define FG_CLI_H

#include "feasgate/engine.h"
#include "feasgate/limits.h"
#include "feasgate/model.h"
#include "http/http.h"

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

/* Exit status of a usage or input error (0, 1, 2 are check verdicts). */
#define FG_EXIT_USAGE 3

/* ---- the commands ---- */
/* `feasgate check MODEL.json REQUEST.json` offline (check.c): 0 pass,
 * 1 fail, 2 inconclusive, 3 usage or input error. */
int fg_check_command(int argc, char **argv);
/* `feasgate check --server URL [--key KEY] MODEL_NAME REQUEST.json`
 * (remote.c): the check run by a daemon; exit status as above. */
int fg_remote_check_command(int argc, char **argv);
/* `feasgate validate MODEL.json...` and `feasgate register --store URL
 * FILE...` (models.c). */
int fg_validate_command(int argc, char **argv);
int fg_register_command(int argc, char **argv);
/* `feasgate scenarios MODEL.json ...` (scenarios.c). */
int fg_scenarios_command(int argc, char **argv);
/* `feasgate sample-model MODEL.json --scenarios S ...` (samplemodel.c):
 * 0 written, 3 usage, invalid input or a model that cannot be written. */
int fg_sample_model_command(int argc, char **argv);
/* `feasgate sample-size ...` (sizes.c). */
int fg_sample_size_command(int argc, char **argv);
/* `feasgate keys add|list|revoke` (keys.c): 0 done, 1 store or system
 * fault, 3 usage, unknown or duplicate name. */
int fg_keys_command(int argc, char **argv);
/* `feasgate explain MODEL.json REQUEST.json --index I` (explain.c): 0
 * printed, 3 usage or invalid input. */
int fg_explain_command(int argc, char **argv);
/* `feasgate replay --store STORE ID` (replay.c): 0 every count
 * reproduced, 1 not, 3 usage or input faults. */
int fg_replay_command(int argc, char **argv);

/* ---- shared pieces (common.c) ---- */
/* A whole file, or standard input for "-" (at most FG_MAX_BODY_HARD
 * bytes), NUL-terminated; NULL with a message on standard error. */
char *fg_cli_read_file(const char *path, size_t *len);
/* A problem on standard error, prefixed "feasgate: WHAT: ". `text`/`len`,
 * when given, is the file the problem is about: a byte offset into it is
 * shown as line and column. */
void fg_cli_print_problem(const char *what, const fg_problem *p,
                          const char *text, size_t len);
/* A whole number from 0 to max, nothing else in s. */
bool fg_cli_parse_u64(const char *s, uint64_t max, uint64_t *out);
/* The model document at `path` compiled, or NULL with the problem
 * printed. */
fg_model *fg_cli_load_model(const char *path);

/* ---- summary.c: what a person reads ---- */
/* The `check --summary` table of a result body, at most `max_rows` rows
 * and then how many were left out. */
void fg_summary_print(FILE *f, const struct cJSON *res, int max_rows);
/* Line and column (1-based, columns in characters) of byte `offset` of
 * `text`, for malformed-JSON messages. */
void fg_text_position(const char *text, size_t len, long long offset,
                      int *line, int *column);

#endif
