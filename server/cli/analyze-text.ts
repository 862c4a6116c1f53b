/**
 * `analyze --format text`: the analyze result for people. Per session and attribute the product
 * test and the variance shares, in plain words; the JSON output is untouched by this module.
 */
import type { AnalyzeJson, FitJson } from '../../domain/analysis.js';
import { varianceShares } from '../../report/report-common.js';
import { counted, dfText, fixed, pClause } from '../../report/report-format.js';

function fitLine(fit: FitJson): string {
  const t = fit.productTest;
  const satterthwaite = t.denDf !== null && Math.abs(t.denDf - Math.round(t.denDf)) > 1e-6 ? ', Satterthwaite df' : '';
  const test = t.F === null ? 'no product test' : `products F = ${fixed(t.F, 1)} on ${dfText(t.numDf)} and ${dfText(t.denDf)} df${satterthwaite}, ${pClause(t.p)}`;
  const shares = varianceShares(fit)
    .map((s) => `${s.key === 'assessor:product' ? 'assessor × product' : s.key === 'residual' ? 'replicate noise' : 'assessor'} ${s.shareText}`)
    .join(', ');
  return `  ${fit.attribute}: ${test}; variance shares ${shares}`;
}

export function formatAnalyzeText(json: AnalyzeJson): string {
  const bySession = new Map<string, FitJson[]>();
  for (const fit of json.fits) {
    const key = fit.session ?? 'all sessions (period model)';
    (bySession.get(key) ?? bySession.set(key, []).get(key)!).push(fit);
  }
  const lines: string[] = [];
  for (const [session, fits] of bySession) {
    const first = fits[0];
    lines.push(`Session ${session}: ${counted(first.assessors, 'assessor')}, ${counted(first.products, 'product')}, ${counted(fits.length, 'attribute')}`);
    for (const fit of fits) lines.push(fitLine(fit));
  }
  const assessors = new Set(json.assessorIndices.map((row) => row.assessor));
  lines.push(`${counted(json.fits.length, 'fit')}; indices for ${counted(assessors.size, 'assessor')} (use --format json for every number).`);
  lines.push('Variance shares are of the spread not due to products: assessor level differences, assessor × product disagreement, replicate noise.');
  return `${lines.join('\n')}\n`;
}
