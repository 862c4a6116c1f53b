/**
 * Tolerances of the comparisons with external references, each with the largest error actually
 * observed beside it (on the committed fixtures, GPL data sets included (test/fixtures/json/gpl/); Node 20, R 4.2.2 with
 * lme4 1.1-31 and lmerTest 3.1-3 with a tight bobyqa). Required bounds are the agreement with lme4/lmerTest the analyze contract promises.
 * Other sections may add their own constants here; keep one constant per purpose.
 */

/** Our REML/ML criterion evaluated at lme4's θ vs lme4's REMLcrit/deviance, relative. Observed ≤ 6.7e-15 (TVbo Lightlevel). */
export const CRITERION_AT_FIXED_THETA_RELATIVE = 1e-8;

/** Optimised criterion vs lme4's, absolute (ours may be lower). Observed |Δ| ≤ 7.4e-12 (TVbo Lightlevel). */
export const CRITERION_OPTIMUM_ABSOLUTE = 1e-7;

/** Variance components, relative (required: 1e-4, or an equal or lower criterion). Observed ≤ 1.4e-6 (seeded period design). */
export const VARIANCE_RELATIVE = 1e-4;

/**
 * A variance lme4 puts on the boundary (its value below 1e-8) must be ours below this
 * fraction of the total variance (methods notes §0.4: < 1e-10 × total is exactly 0). Observed: exactly 0.
 */
export const BOUNDARY_VARIANCE_FRACTION = 1e-10;

/** Product F statistic, relative (required: 1e-4). Observed ≤ 2.1e-7 (seeded 12-session period design). */
export const F_RELATIVE = 1e-4;

/** Satterthwaite denominator df, relative (required: 1e-3). Observed ≤ 3.3e-7 (seeded 12-session period design). */
export const DENOMINATOR_DF_RELATIVE = 1e-3;

/** p-values of the product test, relative (required: 1e-4). Observed ≤ 7.1e-6 (seeded 12-session period design, p ≈ 1e-11). */
export const P_VALUE_RELATIVE = 1e-4;

/** BLUPs, conditional SDs, product means and their SEs, absolute (required: 1e-5). Observed ≤ 5.4e-7 (ham, 81 consumers). */
export const BLUP_AND_SE_ABSOLUTE = 1e-5;

/** REML likelihood ratio of one variance component, absolute. Observed ≤ 9.5e-12. */
export const LIKELIHOOD_RATIO_ABSOLUTE = 1e-6;
