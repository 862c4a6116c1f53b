/** Number wording for the reports: fixed decimals, never "-0.0", p-values one way. */

/** Fixed decimals without a negative zero; a dash for null. */
export function fixed(value: number | null | undefined, decimals: number): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '—';
  const rounded = Number(value.toFixed(decimals));
  return (Object.is(rounded, -0) ? 0 : rounded).toFixed(decimals);
}

/** Signed, for offsets: "+0.6", "−0.3", "0.0". */
export function signed(value: number | null | undefined, decimals: number): string {
  const text = fixed(value, decimals);
  if (text === '—' || Number(text) === 0) return text;
  return Number(text) > 0 ? `+${text}` : `−${text.slice(1)}`;
}

/** p-values: "< 0.001" below a thousandth, else 3 decimals (2 significant digits above 0.01). */
export function pText(p: number | null | undefined): string {
  if (p === null || p === undefined || !Number.isFinite(p)) return '—';
  if (p < 0.001) return '< 0.001';
  if (p < 0.01) return p.toFixed(3);
  return p.toFixed(2);
}

/** "p < 0.001" / "p = 0.04". */
export function pClause(p: number | null | undefined): string {
  const text = pText(p);
  return text.startsWith('<') ? `p ${text}` : `p = ${text}`;
}

/** Degrees of freedom: whole numbers as such, Satterthwaite's fractional ones to one decimal. */
export function dfText(df: number | null | undefined): string {
  if (df === null || df === undefined || !Number.isFinite(df)) return '—';
  return Math.abs(df - Math.round(df)) < 1e-6 ? String(Math.round(df)) : df.toFixed(1);
}

/** "1 session" / "3 sessions". */
export function counted(n: number, one: string, many = `${one}s`): string {
  return `${n.toLocaleString('en-US')} ${n === 1 ? one : many}`;
}

/** Median of the finite values; null when there are none. */
export function medianOf(values: readonly (number | null)[]): number | null {
  const v = values.filter((x): x is number => x !== null && Number.isFinite(x)).sort((a, b) => a - b);
  if (v.length === 0) return null;
  const mid = v.length >> 1;
  return v.length % 2 === 1 ? v[mid] : (v[mid - 1] + v[mid]) / 2;
}

/** Quantile by linear interpolation (type 7, the R default); null when empty. */
export function quantileOf(values: readonly (number | null)[], q: number): number | null {
  const v = values.filter((x): x is number => x !== null && Number.isFinite(x)).sort((a, b) => a - b);
  if (v.length === 0) return null;
  const h = (v.length - 1) * q;
  const lo = Math.floor(h);
  return v[lo] + (h - lo) * ((v[Math.min(lo + 1, v.length - 1)] ?? v[lo]) - v[lo]);
}

/** Local date and time for "generated at" lines, e.g. "2026-12-04 16:05 (UTC+01:00)". */
export function localStamp(date: Date): string {
  const pad = (n: number) => String(n).padStart(2, '0');
  const offset = -date.getTimezoneOffset();
  const sign = offset >= 0 ? '+' : '−';
  const zone = offset === 0 ? 'UTC' : `UTC${sign}${pad(Math.floor(Math.abs(offset) / 60))}:${pad(Math.abs(offset) % 60)}`;
  return `${date.getFullYear()}-${pad(date.getMonth() + 1)}-${pad(date.getDate())} ${pad(date.getHours())}:${pad(date.getMinutes())} (${zone})`;
}
