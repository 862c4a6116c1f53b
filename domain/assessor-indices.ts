/**
 * Per session × attribute × assessor performance indices with their tests (methods §2): the
 * rows stored per session by the refit and read by the monitor, the flag engine and the pages.
 * The five fields of the analyze contract (offset, discriminationF/P, repeatabilityMSE,
 * agreementR, scaling) are a subset; the rest feed the monitor and the flag engine.
 * null = not defined for this design (see reason codes).
 */
export type IndexReason =
  | 'few-products'
  | 'few-assessors'
  | 'no-replicates'
  | 'no-spread'
  | 'panel-not-discriminating'
  | 'incomplete'
  | 'unbalanced';

export interface AssessorSessionIndices {
  session: string;
  attribute: string;
  assessor: string;
  /** Products this assessor rated in the session/attribute. */
  nProducts: number;
  /** Ratings by this assessor in the session/attribute. */
  nRatings: number;

  /** Level offset: mean m_ap − mean M_p over the assessor's products (scale units). */
  offset: number | null;
  /** Level test vs the leave-one-out panel (paired t over products, §2.1). */
  offsetT: number | null;
  offsetDf: number | null;
  offsetP: number | null;

  /** One-way ANOVA of the assessor's values on product (§2.2). */
  discriminationF: number | null;
  discriminationDfNumerator: number | null;
  discriminationDfDenominator: number | null;
  discriminationP: number | null;

  /** Pooled within-cell mean square (a variance, §2.3). */
  repeatabilityMSE: number | null;
  repeatabilityDf: number | null;
  /** s_a / s_(−a): ratio of SDs, assessor vs rest of panel. */
  repeatabilitySdRatio: number | null;
  repeatabilityF: number | null;
  repeatabilityP: number | null;

  /** Pearson r of m_ap with the mean of the other assessors' cell means (§2.4a). */
  agreementR: number | null;
  /** Interaction contrast test "this assessor vs the rest" × products (§2.4c), balanced only. */
  disagreementF: number | null;
  disagreementP: number | null;

  /** cov(m_ap, M_p)/var(M_p) (§2.5). */
  scaling: number | null;
  /** t test of scaling = 1 on P − 2 df. */
  scalingT: number | null;
  scalingP: number | null;

  reasons: IndexReason[];
}
