/*
 * core/quantile.h -- incomplete beta and gamma functions and the beta,
 * gamma and Student t quantiles, with bounded work (core/quantile.c).
 *
 * Used by estimate/ (interval endpoints) and sample/ (inverse-CDF draws of
 * designs and copula members) and engine/ (the replicate t interval), so
 * it lives in core, which every module links.
 *
 * Every function here is pure and may run in any number of threads.
 * Tails are passed separately: a probability u and its complement
 * uc = 1 - u, each exact, so either tail keeps full relative precision.
 */
#ifndef FG_CORE_QUANTILE_H
#define FG_CORE_QUANTILE_H

/* Terms of one continued fraction or series (incomplete beta or gamma).
 * Below the asymptotic threshold the terms needed grow like the square
 * root of the smaller parameter (about 3 sqrt(min(a, b)) near the
 * centre, measured), so FG_Q_ASYM_MIN bounds them well under this cap. */
#define FG_Q_TERMS_MAX 20000
/* Root-finding steps of one quantile: safeguarded Newton with a
 * bisection (geometric while the bracket spans more than a factor of 4)
 * forced whenever 8 steps have not halved log(hi/lo), so at most
 * 8 x 62 halvings + 2 start evaluations; measured: median 7, at most 26
 * over 12,000 random beta and gamma quantiles. */
#define FG_Q_STEPS_MAX 512
/* Smallest parameter (min(a, b) for the beta, the shape for the gamma)
 * from which the incomplete functions use the uniform asymptotic
 * expansion (Temme) with its first correction; the neglected terms are
 * below 1e-12 relative to the tail there. */
#define FG_Q_ASYM_MIN 2e6
/* Degrees of freedom from which the t quantile is the Cornish-Fisher
 * expansion of the normal quantile (four terms; the first omitted one is
 * below 1e-13 relative there for |z| <= 40). */
#define FG_Q_T_EXPANSION_DF 1e5

/* Work counters of one call (may be passed as NULL): steps is the number
 * of root-finding steps, terms the most terms any one continued fraction
 * or series took. Tests assert both stay below the caps above. */
typedef struct {
  int steps;
  int terms;
} fg_qcount;

/* log B(a, b), without cancellation for large arguments. */
double fg_q_log_beta(double a, double b);

/* I_x(a, b) (lower) and 1 - I_x(a, b) (upper) for x in [0, 1] with
 * y = 1 - x given exactly; a, b > 0. */
void fg_q_ibeta(double x, double y, double a, double b, double *lower,
                double *upper, fg_qcount *cnt);
/* P(a, x) (lower) and Q(a, x) = 1 - P(a, x) (upper), a > 0, x >= 0. */
void fg_q_igamma(double a, double x, double *lower, double *upper,
                 fg_qcount *cnt);

/* x with I_x(a, b) = u (and 1 - I_x(a, b) = uc); *xc receives 1 - x
 * computed without cancellation (may be NULL). 0 and 1 at the ends. */
double fg_q_beta_inv(double u, double uc, double a, double b, double *xc,
                     fg_qcount *cnt);
/* x with P(a, x) = u (and Q(a, x) = uc): the standard gamma (scale 1). */
double fg_q_gamma_inv(double u, double uc, double a, fg_qcount *cnt);
/* Standard Student t quantile with df > 0 degrees of freedom.
 * The three quantiles return NaN for parameters outside their domain
 * (a, b, shape, df <= 0 or NaN probabilities), which callers refuse first. */
double fg_q_t_inv(double u, double uc, double df, fg_qcount *cnt);

#endif
