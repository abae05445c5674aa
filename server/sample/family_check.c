/*
 * sample/family_check.c -- the checks every family's parser uses: a
 * parameter positive, below another, at most a bound, whole, in a named
 * range, or a scale small enough that every quantile stays finite. Each
 * reports the element (for an array) or the member (for a scalar, once)
 * by JSON Pointer through fg_family_param_error, with the range and why.
 *
 * Thread use: the building thread (model registration).
 */
#include "sample/sample_internal.h"

#include <cjson/cJSON.h>

#include <float.h>
#include <math.h>
#include <string.h>

int fg_param_is_array(const fg_params *c, const char *name) {
  return cJSON_IsArray(cJSON_GetObjectItemCaseSensitive(c->dist, name));
}

/* v[e] > 0 (strict) or >= 0 for every element; one report for a scalar. */
void fg_param_positive(fg_params *c, const char *name, const double *v,
                          int strict) {
  for (int e = 0; e < c->size; e++) {
    if (strict ? v[e] > 0 : v[e] >= 0) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s %s 0, found %.15g", name,
                          strict ? ">" : ">=", v[e]);
    if (!fg_param_is_array(c, name)) break;
  }
}

void fg_param_less(fg_params *c, const char *lo_name, const double *lo,
                      const char *hi_name, const double *hi, int strict) {
  for (int e = 0; e < c->size; e++) {
    if (strict ? lo[e] < hi[e] : lo[e] <= hi[e]) continue;
    fg_family_param_error(c, FG_EINVAL, hi_name, e,
                          "expected %s %s %s, found %s = %.15g, %s = %.15g",
                          lo_name, strict ? "<" : "<=", hi_name, lo_name, lo[e],
                          hi_name, hi[e]);
    if (!fg_param_is_array(c, lo_name) && !fg_param_is_array(c, hi_name)) break;
  }
}

void fg_param_at_most(fg_params *c, const char *name, const double *v,
                         double max) {
  for (int e = 0; e < c->size; e++) {
    if (v[e] <= max) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s <= %.15g, found %.15g", name, max, v[e]);
    if (!fg_param_is_array(c, name)) break;
  }
}

void fg_param_integer(fg_params *c, const char *name, const double *v) {
  for (int e = 0; e < c->size; e++) {
    if (v[e] == floor(v[e])) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected an integer %s, found %.15g", name, v[e]);
    if (!fg_param_is_array(c, name)) break;
  }
}

/* lo <= v[e] <= hi for every element; the message names the range and
 * why it exists. */
void fg_param_range(fg_params *c, const char *name, const double *v,
                       double lo, double hi, const char *why) {
  for (int e = 0; e < c->size; e++) {
    if (v[e] >= lo && v[e] <= hi) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s in [%.15g, %.15g] (%s), found %.15g",
                          name, lo, hi, why, v[e]);
    if (!fg_param_is_array(c, name)) break;
  }
}

/* |loc| + scale * qmax must stay below a quarter of the largest double,
 * qmax being the standard quantile at FG_ICDF_P_MIN for element e. */
void fg_param_finite_scale(fg_params *c, const char *name,
                              const double *scale, const double *loc,
                              const double *qmax) {
  for (int e = 0; e < c->size; e++) {
    double room = DBL_MAX / 4 - (loc ? fabs(loc[e]) : 0);
    double bound = room / qmax[e];
    if (scale[e] <= bound) continue;
    fg_family_param_error(c, FG_EINVAL, name, e,
                          "expected %s <= %.6g so that every quantile down "
                          "to probability %g stays finite (the standard "
                          "quantile there is at most %.6g), found %.15g",
                          name, bound, FG_ICDF_P_MIN, qmax[e], scale[e]);
    if (!fg_param_is_array(c, name)) break;
  }
}

int fg_param_integral(double v) {
  return v == floor(v) && fabs(v) < 9007199254740992.0;
}

int fg_param_read(fg_params *c, fg_input *in, int slot, const char *name,
                    int required, double dflt) {
  return fg_family_param_vec(c, name, in->par[slot], required, dflt);
}

void fg_param_set_integer(fg_input *in, int value) {
  memset(in->integer, value ? 1 : 0, (size_t)in->size);
}
