/*
 * http/ids.c -- ids of checks ("chk_") and comparisons ("cmp_").
 *
 * An id is the prefix + 26 Crockford base32 characters of a 128-bit
 * value: 48 bits of Unix milliseconds (the clock, core/clock.c) then 80
 * random bits (the seed source). Ids made in the same millisecond by this
 * process increase by one in their random part, so ids sort in creation
 * order and a list cursor can be an id. The generator's last value is the
 * one piece of process-wide state here (mutex-guarded).
 *
 * Thread use: any thread.
 */
#include "http/http_internal.h"

#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <string.h>

static const char crockford[] = "0123456789ABCDEFGHJKMNPQRSTVWXYZ";

static pthread_mutex_t id_lock = PTHREAD_MUTEX_INITIALIZER;
static uint64_t id_last_ms;
static uint8_t id_last_rand[10];

void fg_http_new_id(const char *prefix, char out[40]) {
  uint64_t ms = (uint64_t)floor(fg_time_wall() * 1000.0);
  /* 80 random bits from the seed source (53 bits a draw): 6 + 4 bytes. */
  uint8_t rnd[10];
  uint64_t r0 = fg_seed_draw(), r1 = fg_seed_draw();
  for (int i = 0; i < 6; i++) rnd[i] = (uint8_t)(r0 >> (8 * i));
  for (int i = 0; i < 4; i++) rnd[6 + i] = (uint8_t)(r1 >> (8 * i));
  pthread_mutex_lock(&id_lock);
  if (ms <= id_last_ms) {
    ms = id_last_ms;
    memcpy(rnd, id_last_rand, sizeof rnd);
    for (int i = (int)sizeof rnd - 1; i >= 0; i--)
      if (++rnd[i] != 0) break;
  }
  id_last_ms = ms;
  memcpy(id_last_rand, rnd, sizeof rnd);
  pthread_mutex_unlock(&id_lock);

  uint8_t bytes[16];
  for (int i = 0; i < 6; i++)
    bytes[i] = (uint8_t)(ms >> (8 * (5 - i)));
  memcpy(bytes + 6, rnd, sizeof rnd);
  /* 26 groups of 5 bits over 130 bits: two zero bits, then the 128. */
  memcpy(out, prefix, 4);
  for (int k = 0; k < 26; k++) {
    int v = 0;
    for (int b = k * 5 - 2; b < k * 5 + 3; b++) {
      int bit = b < 0 ? 0 : (bytes[b / 8] >> (7 - b % 8)) & 1;
      v = (v << 1) | bit;
    }
    out[4 + k] = crockford[v];
  }
  out[30] = '\0';
}

void fg_http_check_id(char out[40]) {
  fg_http_new_id("chk_", out);
}

bool fg_http_is_id(const char *prefix, const char *s) {
  if (strncmp(s, prefix, 4) != 0 || strlen(s) != 30) return false;
  for (int i = 4; i < 30; i++)
    if (!strchr(crockford, s[i]) || s[i] == '\0') return false;
  return true;
}
