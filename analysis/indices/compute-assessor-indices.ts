import type { AssessorIndicesJson } from '../../domain/analysis.js';
import type { Observation } from '../../domain/ratings.js';
import { agreementCorrelation, disagreementTest } from './agreement.js';
import { balancedAnova } from './balanced-anova.js';
import { buildCellTable } from './cell-table.js';
import { contractIndices } from './contract-indices.js';
import { assessorAnova } from './discrimination.js';
import { pairedLevelTest } from './level.js';
import { repeatabilityTest } from './repeatability.js';
import { scalingCoefficient, type ScalingOptions } from './scaling.js';
import type { AssessorSessionIndices, IndexReason } from './types.js';

export type AssessorIndicesOptions = ScalingOptions;

/**
 * Per-assessor performance indices of one session and attribute, one entry per assessor in
 * first-seen order. The five analyze-contract fields follow the analyze JSON contract exactly (offset vs the panel
 * mean including the assessor; one-way ANOVA discrimination and its within-cell mean square;
 * agreement r with the leave-one-out panel; scaling cov/var over the assessor's products).
 * The test fields follow the methods notes: §2.1 paired level test, §2.3 variance-ratio
 * repeatability test, §2.4c disagreement F (balanced with replicates), §2.5 test of scaling = 1.
 * `reasons` lists why any field is null (deduplicated).
 *
 * Throws when the observations mix sessions or attributes (a programming error).
 */
export function computeAssessorIndices(observations: readonly Observation[], options: AssessorIndicesOptions = {}): AssessorSessionIndices[] {
  if (observations.length === 0) return [];
  const table = buildCellTable(observations);
  const anova = balancedAnova(table);
  // The five contract values come from the one flat-array implementation; the modules below
  // add the tests and their df (their own estimates are the same numbers, used inside the tests).
  const contract = contractIndices(observations);
  return table.assessors.map((assessor, assessorIndex) => {
    const fields = contract[assessorIndex];
    const oneWay = assessorAnova(table, assessor);
    const level = pairedLevelTest(table, assessor);
    const repeatability = repeatabilityTest(table, assessor, oneWay);
    const agreement = agreementCorrelation(table, assessor);
    const disagreement = disagreementTest(anova, assessorIndex);
    const scaling = scalingCoefficient(table, assessor, anova, options);
    const reasons = new Set<IndexReason>([
      ...level.reasons,
      ...oneWay.reasons,
      ...repeatability.reasons,
      ...agreement.reasons,
      ...disagreement.reasons,
      ...scaling.reasons,
    ]);
    return {
      session: table.session,
      attribute: table.attribute,
      assessor,
      nProducts: oneWay.nProducts,
      nRatings: oneWay.nRatings,
      offset: fields.offset,
      offsetT: level.t,
      offsetDf: level.df,
      offsetP: level.pValue,
      discriminationF: fields.discriminationF,
      discriminationDfNumerator: oneWay.dfNumerator,
      discriminationDfDenominator: oneWay.dfDenominator,
      discriminationP: fields.discriminationP,
      repeatabilityMSE: fields.repeatabilityMSE,
      repeatabilityDf: oneWay.withinDf > 0 ? oneWay.withinDf : null,
      repeatabilitySdRatio: repeatability.sdRatio,
      repeatabilityF: repeatability.F,
      repeatabilityP: repeatability.pValue,
      agreementR: fields.agreementR,
      disagreementF: disagreement.F,
      disagreementP: disagreement.pValue,
      scaling: fields.scaling,
      scalingT: scaling.t,
      scalingP: scaling.pValue,
      reasons: [...reasons],
    };
  });
}

/** The five index fields of the analyze JSON contract for one assessor. */
export type AnalyzeContractIndices = AssessorIndicesJson;

/**
 * The matching fields of `computeAssessorIndices` (which takes them from here), without the tests
 * the analyze JSON does not print (level, repeatability, disagreement and scaling tests, the
 * agreement interval): for a year of sessions those cost more than the fits.
 */
export function computeAnalyzeContractIndices(observations: readonly Observation[]): AnalyzeContractIndices[] {
  return contractIndices(observations);
}
