/** Number formatting for flag messages: fixed decimals, never "-0.0". */
export function points(value: number, decimals = 1): string {
  const rounded = Number(value.toFixed(decimals));
  return (Object.is(rounded, -0) ? 0 : rounded).toFixed(decimals);
}

export function pValueText(p: number): string {
  if (p < 1e-16) return '< 1e-16';
  if (p < 0.001) return p.toExponential(1);
  return p.toPrecision(2);
}

/** "8 sessions" / "1 session". */
export function sessionsText(n: number): string {
  return `${n} session${n === 1 ? '' : 's'}`;
}
