/** Data that cannot be fitted, with a sentence for people (no stack traces, no paths). */
export type LmmFitErrorCode =
  | 'no-observations'
  | 'mixed-groups'
  | 'constant-response'
  | 'too-few-assessors'
  | 'too-few-sessions'
  | 'too-few-observations'
  | 'not-finite'
  | 'no-residual-variation';

export class LmmFitError extends Error {
  readonly code: LmmFitErrorCode;
  constructor(code: LmmFitErrorCode, message: string) {
    super(message);
    this.name = 'LmmFitError';
    this.code = code;
  }
}
