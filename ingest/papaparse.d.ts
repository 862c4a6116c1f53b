/**
 * The part of papaparse (5.x, ships no types) that csv-records.ts uses: the low-level
 * Parser, which parses one string and says where the last complete record ended, so the
 * caller can stream text through it chunk by chunk.
 */
declare module 'papaparse' {
  export interface ParseError {
    type: string;
    /** 'MissingQuotes' (a quoted cell never closed) or 'InvalidQuotes' (text after a closing quote), among others. */
    code: string;
    message: string;
    /** Index into `data` of the record the error is in. */
    row: number;
    index: number;
  }
  export interface ParserConfig {
    delimiter: string;
    newline: '\n' | '\r' | '\r\n';
    quoteChar?: string;
  }
  export interface ParserResult {
    data: string[][];
    errors: ParseError[];
    /** cursor: offset (plus baseIndex) just past the last record returned. */
    meta: { cursor: number };
  }
  export class Parser {
    constructor(config: ParserConfig);
    /** ignoreLastRow: the input may end inside a record; leave that record for the next call. */
    parse(input: string, baseIndex: number, ignoreLastRow: boolean): ParserResult;
  }
  const Papa: { Parser: typeof Parser };
  export default Papa;
}
