// CSV of chart data (components/charts/csv.ts).
import { describe, expect, it } from 'vitest';
import { toCsv } from '@/components/charts/csv';

describe('toCsv', () => {
  it('quotes per RFC 4180 and defuses spreadsheet formulas', () => {
    // reference: RFC 4180 §2 (fields with comma, quote or line break are quoted; quotes doubled);
    // OWASP "CSV Injection": cells starting with = + - @ are prefixed with a single quote.
    expect(toCsv(['a', 'b'], [['x,y', 'say "hi"'], ['=SUM(A1)', 1.5], [null, Number.NaN]])).toBe('a,b\r\n"x,y","say ""hi"""\r\n\'=SUM(A1),1.5\r\n,\r\n');
  });
  it('keeps negative numbers as numbers', () => {
    expect(toCsv(['v'], [[-0.25]])).toBe('v\r\n-0.25\r\n');
  });
});
