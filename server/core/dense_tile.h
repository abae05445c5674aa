/*
 * core/dense_tile.h -- the body of one vector path of core/dense.c,
 * included once per path with these macros set:
 *   DT_W     lanes per vector (2 SSE2, 4 AVX2, 8 AVX-512F)
 *   DT_SUF   suffix of the functions made (sse2, avx2, avx512)
 *   DT_ATTR  the functions' target attribute (empty for the baseline)
 *   DT_SPLATP(p)  optional: the path's broadcast of *p to a vector
 * It defines tiles_<suf>(job, n): every row of the job for the lanes
 * [0, n - n % (2 * DT_W)), returning that count; the caller runs the
 * remaining lanes with the scalar loop.
 *
 * The text is the same for every path: GCC's vector extensions, whose
 * element-wise + and * are the IEEE operations of the scalar code, one
 * rounding each (-ffp-contract=off forbids fusing them, also in the
 * functions built for processors with FMA). So every path gives the bits
 * of the scalar loop in dense.c.
 *
 * Blocking: four rows at a time, two vectors of lanes per row, so eight
 * accumulators stay in registers while each column's two vectors are
 * loaded once for the four rows (and each coefficient once per tile).
 * Lower maps run their row blocks from the last row up, in place: a block
 * reads columns 0 .. its last row and writes only its own rows, after
 * reading them, and no row above it reads those.
 *
 * Thread use: as dense.c.
 */
#define DT_CAT2(a, b) a##_##b
#define DT_CAT(a, b) DT_CAT2(a, b)
#define DT_V DT_CAT(dt_vec, DT_SUF)
#define DT_TILE (2 * DT_W)

typedef double DT_V __attribute__((vector_size(DT_W * sizeof(double))));

DT_ATTR static inline DT_V DT_CAT(dt_load, DT_SUF)(const double *p) {
  DT_V v;
  memcpy(&v, p, sizeof v);
  return v;
}

DT_ATTR static inline void DT_CAT(dt_store, DT_SUF)(double *p, DT_V v) {
  memcpy(p, &v, sizeof v);
}

/* Every lane = *p: DT_SPLATP is the path's one-instruction broadcast
 * from memory where it has one (vbroadcastsd), else element stores. */
DT_ATTR static inline DT_V DT_CAT(dt_splat, DT_SUF)(const double *p) {
#if defined(DT_SPLATP)
  return DT_SPLATP(p);
#else
  DT_V v;
  for (int i = 0; i < DT_W; i++) v[i] = *p;
  return v;
#endif
}

#define LD DT_CAT(dt_load, DT_SUF)
#define ST DT_CAT(dt_store, DT_SUF)
#define SP DT_CAT(dt_splat, DT_SUF)

/* acc_q += g_q[k] * column k, for rows q in [q0, 4) of a block. */
#define DT_TERM4(k, q0)                                                      \
  do {                                                                       \
    const double *zc = in[k] + tin;                                          \
    DT_V z0 = LD(zc), z1 = LD(zc + DT_W), b;                                 \
    if ((q0) <= 0) {                                                         \
      b = SP(&g0[k]);                                                         \
      a00 = a00 + b * z0, a01 = a01 + b * z1;                                \
    }                                                                        \
    if ((q0) <= 1) {                                                         \
      b = SP(&g1[k]);                                                         \
      a10 = a10 + b * z0, a11 = a11 + b * z1;                                \
    }                                                                        \
    if ((q0) <= 2) {                                                         \
      b = SP(&g2[k]);                                                         \
      a20 = a20 + b * z0, a21 = a21 + b * z1;                                \
    }                                                                        \
    b = SP(&g3[k]);                                                           \
    a30 = a30 + b * z0, a31 = a31 + b * z1;                                  \
  } while (0)

/* Rows i0 .. i0+3 over the tile at t0, reading column k at in[k] + tin. */
DT_ATTR static void DT_CAT(dt_block4, DT_SUF)(const dense_job *j,
                                              const double *const *in, int tin,
                                              int i0, int t0) {
  const double *g0 = j->g + (size_t)i0 * j->ld, *g1 = g0 + j->ld,
               *g2 = g1 + j->ld, *g3 = g2 + j->ld;
  static const double zero4[4] = {0, 0, 0, 0};
  const double *s0 = j->start ? j->start + i0 : zero4;
  DT_V a00, a01, a10, a11, a20, a21, a30, a31;
  a00 = a01 = SP(&s0[0]);
  a10 = a11 = SP(&s0[1]);
  a20 = a21 = SP(&s0[2]);
  a30 = a31 = SP(&s0[3]);
  int kc = j->lower ? i0 : j->ncols;
  for (int k = 0; k < kc; k++) DT_TERM4(k, 0);
  if (j->lower) { /* the block's triangle: row i0+q takes k <= i0+q */
    DT_TERM4(i0, 0);
    DT_TERM4(i0 + 1, 1);
    DT_TERM4(i0 + 2, 2);
    DT_TERM4(i0 + 3, 3);
  }
  ST(j->out[i0] + t0, a00), ST(j->out[i0] + t0 + DT_W, a01);
  ST(j->out[i0 + 1] + t0, a10), ST(j->out[i0 + 1] + t0 + DT_W, a11);
  ST(j->out[i0 + 2] + t0, a20), ST(j->out[i0 + 2] + t0 + DT_W, a21);
  ST(j->out[i0 + 3] + t0, a30), ST(j->out[i0 + 3] + t0 + DT_W, a31);
}

/* One row i over the tile at t0 (columns as for dt_block4). */
DT_ATTR static void DT_CAT(dt_row1, DT_SUF)(const dense_job *j,
                                            const double *const *in, int tin,
                                            int i, int t0) {
  const double *gi = j->g + (size_t)i * j->ld;
  static const double zero1 = 0;
  DT_V a0, a1;
  a0 = a1 = SP(j->start ? &j->start[i] : &zero1);
  int len = j->lower ? i + 1 : j->ncols;
  for (int k = 0; k < len; k++) {
    const double *zc = in[k] + tin;
    DT_V b = SP(&gi[k]);
    a0 = a0 + b * LD(zc), a1 = a1 + b * LD(zc + DT_W);
  }
  ST(j->out[i] + t0, a0), ST(j->out[i] + t0 + DT_W, a1);
}

/* Columns are registers FG_BLOCK doubles apart, a power of two: a tile's
 * column pieces would all fall into two sets of a 64-set L1 and evict
 * each other between row blocks. So a tile's columns are first copied
 * into one contiguous buffer (when at most FG_DENSE_PACK_COLS of them) and
 * every row block reads the copy; a copy changes no value. In the lower
 * map the copy also keeps the inputs while the rows are written. */
DT_ATTR static int DT_CAT(tiles, DT_SUF)(const dense_job *j, int n) {
  int nc = j->lower ? j->nrows : j->ncols;
  bool pack = nc <= FG_DENSE_PACK_COLS;
  double buf[FG_DENSE_PACK_COLS * DT_TILE] __attribute__((aligned(64)));
  const double *pk[FG_DENSE_PACK_COLS];
  if (pack)
    for (int k = 0; k < nc; k++) pk[k] = buf + (size_t)k * DT_TILE;
  const double *const *in = pack ? pk : j->in;
  int t0 = 0;
  for (; t0 + DT_TILE <= n; t0 += DT_TILE) {
    if (pack)
      for (int k = 0; k < nc; k++) { /* vector-wide: loads forward */
        double *d = buf + (size_t)k * DT_TILE;
        const double *src = j->in[k] + t0;
        ST(d, LD(src)), ST(d + DT_W, LD(src + DT_W));
      }
    int tin = pack ? 0 : t0;
    int i1 = j->nrows;
    for (; i1 >= 4; i1 -= 4) DT_CAT(dt_block4, DT_SUF)(j, in, tin, i1 - 4, t0);
    for (int i = i1 - 1; i >= 0; i--)
      DT_CAT(dt_row1, DT_SUF)(j, in, tin, i, t0);
  }
  return t0;
}

#undef DT_TERM4
#undef DT_SPLATP
#undef LD
#undef ST
#undef SP
#undef DT_TILE
#undef DT_V
#undef DT_CAT
#undef DT_CAT2
