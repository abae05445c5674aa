/*
 * store/backend.h -- what a storage backend provides to store.c (internal
 * to store/).
 *
 * Design: store.c owns the public fg_store handle and forwards every call
 * of store/store.h to the backend chosen by the URL's scheme, through one
 * table of functions per backend. A backend's functions take its own
 * handle (`void *`) and keep the contracts written in store.h; store.c
 * adds nothing but the dispatch and the result structs' free functions.
 *
 * Thread use: as store.h says; each backend serialises its own connection.
 */
#ifndef FG_STORE_BACKEND_H
#define FG_STORE_BACKEND_H

#include "store/store.h"

typedef struct fg_store_ops {
  const char *scheme; /* "sqlite", "postgresql" */
  bool shared;        /* several daemons may serve one store */
  /* the whole URL (sqlite: "sqlite:PATH"; postgresql: read by libpq) */
  fg_status (*open)(const char *url, void **out, fg_problem *p);
  void (*close)(void *b);
  fg_status (*ping)(void *b, fg_problem *p);
  fg_status (*put_version)(void *b, const char *name, const char *digest,
                           const char *canonical, const char *title,
                           fg_store_version *out, bool *created, fg_problem *p);
  fg_status (*get_version)(void *b, const char *name, int version,
                           fg_store_version *out, fg_problem *p);
  fg_status (*list_models)(void *b, fg_store_version **out, int *n,
                           fg_problem *p);
  fg_status (*retire_model)(void *b, const char *name, fg_problem *p);
  fg_status (*put_check)(void *b, const fg_store_check *c, fg_problem *p);
  fg_status (*finish_check)(void *b, const fg_store_check *c, fg_problem *p);
  fg_status (*get_check)(void *b, const char *id, fg_store_check *out,
                         fg_problem *p);
  fg_status (*note_progress)(void *b, const char *id, const char *body,
                             fg_problem *p);
  /* shared stores only (NULL otherwise) */
  fg_status (*request_cancel)(void *b, const char *id, fg_problem *p);
  fg_status (*cancel_requests)(void *b, char (*ids)[40], int cap, int *n,
                               fg_problem *p);
  /* f->limit is set (1 .. FG_LIST_LIMIT_MAX); up to f->limit + 1 rows in
   * order, so store.c can tell whether more remain */
  fg_status (*list_checks)(void *b, const fg_check_filter *f,
                           fg_store_check **out, int *n, fg_problem *p);
  fg_status (*mark_interrupted)(void *b, int *count, fg_problem *p);
  fg_status (*put_comparison)(void *b, const fg_store_comparison *c,
                              fg_problem *p);
  fg_status (*finish_comparison)(void *b, const fg_store_comparison *c,
                                 fg_problem *p);
  fg_status (*get_comparison)(void *b, const char *id,
                              fg_store_comparison *out, fg_problem *p);
  void (*inject_write_fault)(void *b, int nth);
  fg_status (*put_key)(void *b, const fg_store_key *k, fg_problem *p);
  fg_status (*list_keys)(void *b, bool live_only, fg_store_key **out, int *n,
                         fg_problem *p);
  fg_status (*revoke_key)(void *b, const char *name, fg_problem *p);
} fg_store_ops;

extern const fg_store_ops fg_store_sqlite_ops;
extern const fg_store_ops fg_store_pgsql_ops;

/* Shared by the backends: the current UTC time as RFC 3339 with 'Z'. */
void fg_store_now_rfc3339(char buf[32]);

#endif
