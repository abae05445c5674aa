/*
 * core/limits.c -- the names of the limits (feasgate/limits.h), generated
 * from FG_LIMITS_TABLE and FG_SETTINGS_LIMITS_TABLE so that each name is
 * written once.
 *
 * Thread use: any thread; constant data.
 */
#include "feasgate/limits.h"

#include <stddef.h>

static const char *const names[FG_LIMIT_COUNT] = {
#define NAME3(id, name, value) [FG_LIMIT_##id] = name,
#define NAME2(id, name) [FG_LIMIT_##id] = name,
    FG_LIMITS_TABLE(NAME3) FG_SETTINGS_LIMITS_TABLE(NAME2)
#undef NAME3
#undef NAME2
};

const char *fg_limit_name(fg_limit which) {
  if ((int)which < 0 || which >= FG_LIMIT_COUNT) return "?";
  return names[which];
}
