/*
 * tests/unit/model/test_cache.c -- reference counting and the digest cache.
 *
 * Covers: least-recently-used eviction, the cache's own reference keeping
 * a model alive, a cache of size 0, and several threads getting, putting
 * and dropping the same models with the counts coming back exactly (run
 * under the sanitizer build too). The expected counts follow from the
 * cache's rules (least recently used eviction is common practice); no
 * outside reference applies.
 */
#include "model_testutil.h"

#include <pthread.h>

static fg_model *model_named(const char *name) {
  char *doc = edit("\"unit-demo.v1\"", name);
  fg_problem p;
  fg_model *m = NULL;
  compile(doc, &p, &m);
  free(doc);
  CHECK(m != NULL);
  return m;
}

static void test_cache(void) {
  fg_model *a = model_named("\"a\""), *b = model_named("\"b\""),
           *c = model_named("\"c\"");
  if (!a || !b || !c) {
    fg_model_unref(a);
    fg_model_unref(b);
    fg_model_unref(c);
    return;
  }
  CHECK(strcmp(a->digest, b->digest) != 0);
  fg_model_cache *cache = fg_model_cache_new(2);
  CHECK(cache != NULL);
  CHECK(fg_model_cache_get(cache, a->digest) == NULL);
  fg_model_cache_put(cache, a);
  CHECK_INT(a->refs, 2);
  fg_model_cache_put(cache, a); /* again: no second reference */
  CHECK_INT(a->refs, 2);
  fg_model_cache_put(cache, b);
  fg_model *got = fg_model_cache_get(cache, a->digest); /* a is now newest */
  CHECK(got == a);
  CHECK_INT(a->refs, 3);
  fg_model_unref(got);
  fg_model_cache_put(cache, c); /* evicts b, the least recently used */
  CHECK_INT(b->refs, 1);
  CHECK(fg_model_cache_get(cache, b->digest) == NULL);
  got = fg_model_cache_get(cache, c->digest);
  CHECK(got == c);
  fg_model_unref(got);
  /* the cache's reference keeps a model alive after its owner lets go */
  char digest[FG_DIGEST_MAX];
  snprintf(digest, sizeof digest, "%s", c->digest);
  fg_model_unref(c);
  got = fg_model_cache_get(cache, digest);
  CHECK(got != NULL && strcmp(got->name, "c") == 0);
  fg_model_unref(got);
  fg_model_cache_free(cache);
  CHECK_INT(a->refs, 1);
  fg_model_unref(a);
  fg_model_unref(b);

  fg_model_cache *none = fg_model_cache_new(0);
  fg_model *d = model_named("\"d\"");
  fg_model_cache_put(none, d);
  CHECK(fg_model_cache_get(none, d ? d->digest : "") == NULL);
  fg_model_cache_free(none);
  fg_model_unref(d);
}

/* Several threads getting, putting and dropping the same few models: the
 * counts must come back exactly (run under the sanitizer build too). */
typedef struct cache_job {
  fg_model_cache *cache;
  fg_model *models[3];
} cache_job;

static void *cache_worker(void *arg) {
  cache_job *job = arg;
  for (int i = 0; i < 20000; i++) {
    fg_model *m = job->models[i % 3];
    if (i % 4 == 0) {
      fg_model_cache_put(job->cache, m);
    } else {
      fg_model *got = fg_model_cache_get(job->cache, m->digest);
      if (got && got != m) return (void *)1;
      fg_model_unref(got);
    }
  }
  return NULL;
}

static void test_cache_threads(void) {
  cache_job job = {
      fg_model_cache_new(2),
      {model_named("\"t1\""), model_named("\"t2\""), model_named("\"t3\"")}};
  if (!job.cache || !job.models[0] || !job.models[1] || !job.models[2]) return;
  pthread_t th[4];
  for (int i = 0; i < 4; i++)
    CHECK(pthread_create(&th[i], NULL, cache_worker, &job) == 0);
  for (int i = 0; i < 4; i++) {
    void *r = NULL;
    pthread_join(th[i], &r);
    CHECK(r == NULL);
  }
  fg_model_cache_free(job.cache);
  for (int i = 0; i < 3; i++) {
    CHECK_INT(job.models[i]->refs, 1);
    fg_model_unref(job.models[i]);
  }
}

int main(void) {
  test_cache();
  test_cache_threads();
  return fg_test_finish();
}
