import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv, parseCanonicalCsvDetailed, parseCsvRecords, writeCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { createDataset } from '../../../engine/data/dataset.js';
import { DataError, type DataProblem } from '../../../engine/data/types.js';

// Invented example rows (format tests only).
const basic = [
  'subject,time_h,event,amount_mg,duration_h,conc_mg_L,censored,lloq_mg_L,weight_kg,sex',
  'A1,0,dose,1000,1,,,,70,F',
  'A1,11.5,level,,,8.2,0,0.5,70,F',
  'A1,12,dose,1000,1,,,,70,F',
  'A1,23.5,level,,,,1,0.5,,F',
  'B2,0,dose,500,,,,,82.5,M',
  'B2,6,level,,,12.25,,,82.5,M',
].join('\n') + '\n';

function problemsOf(text: string): DataProblem[] {
  try {
    parseCanonicalCsv(text);
  } catch (e) {
    if (e instanceof DataError) return [...e.problems];
    throw e;
  }
  throw new Error('expected a DataError');
}

describe('parseCanonicalCsv', () => {
  it('reads doses, levels, censoring and covariates', () => {
    const ds = parseCanonicalCsv(basic);
    expect(ds.subjects.map((s) => s.id)).toEqual(['A1', 'B2']);
    expect(ds.covariateNames).toEqual(['weight_kg', 'sex']);
    const [a, b] = ds.subjects;
    expect(a.doses).toEqual([
      { timeH: 0, amountMg: 1000, route: 'infusion', durationH: 1, sourceRow: 2 },
      { timeH: 12, amountMg: 1000, route: 'infusion', durationH: 1, sourceRow: 4 },
    ]);
    expect(a.observations[0]).toEqual({ timeH: 11.5, valueMgL: 8.2, censored: false, lloqMgL: 0.5, sourceRow: 3 });
    expect(a.observations[1]).toEqual({ timeH: 23.5, valueMgL: 0.5, censored: true, lloqMgL: 0.5, sourceRow: 5 });
    expect(a.covariates.weight_kg).toBe(70);
    expect(a.covariates.sex).toBe('F');
    expect(b.doses[0].route).toBe('bolus');
    expect(b.covariates.weight_kg).toBe(82.5);
    expect(Object.getPrototypeOf(a.covariates)).toBeNull();
  });

  it('finds columns by name in any order, case-insensitively, with route and ss_interval_h', () => {
    const text = [
      'Event,SUBJECT,route,time_h,ss_interval_h,amount_mg,conc_mg_L,crcl',
      'dose,P,oral,0,12,250,,90',
      'level,P,,2,,,3.5,90',
    ].join('\n') + '\n';
    const ds = parseCanonicalCsv(text);
    expect(ds.subjects[0].doses[0]).toEqual({ timeH: 0, amountMg: 250, route: 'oral', durationH: 0, steadyStateIntervalH: 12, sourceRow: 2 });
    expect(ds.subjects[0].observations[0].valueMgL).toBe(3.5);
    expect(ds.covariateNames).toEqual(['crcl']);
  });

  it('accepts a BOM, CRLF, quoted fields with commas, quotes and line breaks, and trailing blank lines', () => {
    const text = '\uFEFFsubject,time_h,event,amount_mg,conc_mg_L,ward\r\n"X, 1",0,dose,100,,"North ""A"""\r\n"X, 1",1,level,,2,"North ""A"""\r\n"Y",0,dose,100,,"two\r\nlines"\r\n"Y",1,level,,2,"two\r\nlines"\r\n\r\n\r\n,,,,,\r\n';
    const ds = parseCanonicalCsv(text);
    expect(ds.subjects.map((s) => s.id)).toEqual(['X, 1', 'Y']);
    expect(ds.subjects[0].covariates.ward).toBe('North "A"');
    expect(ds.subjects[1].covariates.ward).toBe('two\r\nlines');
    // Line numbers count physical lines: Y's level starts on line 6.
    expect(ds.subjects[1].observations[0].sourceRow).toBe(6);
  });

  it('numeric covariates only when every value is a number; text otherwise', () => {
    const text = ['subject,time_h,event,amount_mg,conc_mg_L,ward,age', 'A,0,dose,1,,12,40', 'A,1,level,,1,12,40', 'B,0,dose,1,,ICU,50', 'B,1,level,,1,ICU,'].join('\n') + '\n';
    const ds = parseCanonicalCsv(text);
    expect(ds.subjects[0].covariates.ward).toBe('12');
    expect(ds.subjects[0].covariates.age).toBe(40);
    expect(ds.subjects[1].covariates.age).toBe(50);
  });

  it('reports every bad row with its line and reason', () => {
    const text = [
      'subject,time_h,event,amount_mg,duration_h,conc_mg_L,censored,lloq_mg_L,route,wt',
      'A,-1,dose,100,,,,,iv,70', // 2: negative time
      'A,1,dose,-5,,,,,iv,70', // 3: negative amount
      'A,2,dose,,,,,,iv,70', // 4: no amount
      'A,3,level,,,abc,,,,70', // 5: bad conc
      'A,4,level,,,,1,,,70', // 6: censored without lloq
      'A,5,infuse,,,,,,,70', // 7: bad event
      'A,6,dose,100,2,,,,oral,70', // 8: oral with duration
      'A,7,dose,100,,,,,sc,70', // 9: bad route
      'A,8,level,,,"1,5",,,,70', // 10: decimal comma
      'A,9,level,,,3,maybe,,,70', // 11: bad censored
      'A,NaN,level,,,3,,,,70', // 12: NaN time
      'A,10,level,,,3,,,,71', // 13: covariate changes
      ',11,level,,,3,,,,70', // 14: empty subject
      'A,12,level,,,3,,,', // 15: too few fields
      'A,13,dose,100,,5,,,,70', // 16: conc on a dose row
    ].join('\n') + '\n';
    const problems = problemsOf(text);
    const byLine = new Map(problems.map((p) => [p.row, p]));
    expect([...byLine.keys()].sort((a, b) => a! - b!)).toEqual([2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16]);
    expect(byLine.get(2)).toMatchObject({ subject: 'A', field: 'time_h' });
    expect(byLine.get(2)!.message).toMatch(/>= 0/);
    expect(byLine.get(3)).toMatchObject({ field: 'amount_mg' });
    expect(byLine.get(4)!.message).toMatch(/needs amount_mg/);
    expect(byLine.get(5)).toMatchObject({ field: 'conc_mg_L' });
    expect(byLine.get(6)).toMatchObject({ field: 'lloq_mg_L' });
    expect(byLine.get(7)!.message).toMatch(/"dose" or "level"/);
    expect(byLine.get(8)!.message).toMatch(/oral dose has no duration/);
    expect(byLine.get(9)!.message).toMatch(/iv or oral/);
    expect(byLine.get(10)!.message).toMatch(/decimal point/);
    expect(byLine.get(11)).toMatchObject({ field: 'censored' });
    expect(byLine.get(12)).toMatchObject({ field: 'time_h' });
    expect(byLine.get(13)).toMatchObject({ subject: 'A', field: 'wt' });
    expect(byLine.get(13)!.message).toMatch(/changes within subject A \(70 on line 2, 71 here\)/);
    expect(byLine.get(14)).toMatchObject({ field: 'subject' });
    expect(byLine.get(15)!.message).toMatch(/9 field\(s\) but the header has 10/);
    expect(byLine.get(16)!.message).toMatch(/dose row has no level/);
  });

  it('header problems: missing required, duplicate and empty names', () => {
    expect(problemsOf('subject,event\nA,dose\n')[0].message).toMatch(/no "time_h" column/);
    expect(problemsOf('subject,time_h,event,Subject\nA,0,dose,A\n')[0].message).toMatch(/appears twice/);
    expect(problemsOf('subject,time_h,event,\nA,0,dose,x\n')[0].message).toMatch(/empty header/);
    expect(problemsOf('')[0].message).toMatch(/empty/);
    expect(problemsOf('subject,time_h,event\n')[0].message).toMatch(/no data rows/);
  });

  it('an unclosed quote is reported with the line it starts on', () => {
    const problems = problemsOf('subject,time_h,event,amount_mg\nA,0,dose,1\n"B,1,dose,1\nC,0,dose,1\n');
    expect(problems[0]).toMatchObject({ row: 3 });
    expect(problems[0].message).toMatch(/never closed/);
  });

  it('skips grid rows written by simulate', () => {
    const text = ['subject,time_h,event,amount_mg,conc_mg_L,grid', 'A,0,dose,100,,', 'A,0.5,level,,9,1', 'A,1,level,,8,0'].join('\n') + '\n';
    const r = parseCanonicalCsvDetailed(text);
    expect(r.skippedGridRows).toBe(1);
    expect(r.dataset.subjects[0].observations.length).toBe(1);
  });
});

describe('writeCanonicalCsv', () => {
  it('round-trips exactly, including awkward numbers and text', () => {
    const ds = createDataset(
      [
        {
          id: 'p,"1"',
          covariates: { weight_kg: 0.1 + 0.2, ward: ' spaced ', sex: 'F' },
          doses: [
            { timeH: 0, amountMg: 1 / 3, route: 'infusion', durationH: 0.5, steadyStateIntervalH: 12 },
            { timeH: 1e-7, amountMg: 1e21, route: 'bolus', durationH: 0 },
            { timeH: 3, amountMg: 250, route: 'oral', durationH: 0 },
          ],
          observations: [
            { timeH: 2.000000000000001, valueMgL: 5e-324, censored: false },
            { timeH: 4, valueMgL: 0.25, censored: true, lloqMgL: 0.25 },
            { timeH: 5, valueMgL: -0.125, censored: false, lloqMgL: 0.1 },
          ],
        },
        { id: 'q', covariates: { sex: 'M' }, doses: [{ timeH: 0, amountMg: 10, route: 'bolus', durationH: 0 }], observations: [] },
      ],
      ['weight_kg', 'ward', 'sex'],
    );
    const text = writeCanonicalCsv(ds);
    const back = parseCanonicalCsv(text);
    const strip = (d: typeof ds) => JSON.parse(JSON.stringify(d, (k, v) => (k === 'sourceRow' ? undefined : v)));
    expect(strip(back)).toEqual(strip(ds));
    expect(writeCanonicalCsv(back)).toBe(text);
    expect(writeCanonicalCsv(ds, { newline: '\r\n' }).split('\r\n').length).toBe(text.split('\n').length);
  });

  it('writes predictions in place of levels and grid rows marked grid = 1', () => {
    const ds = parseCanonicalCsv(basic);
    const text = writeCanonicalCsv(ds, {
      predictions: new Map([['A1', [7.5, 0.75]], ['B2', [11]]]),
      grid: new Map([['B2', { timesH: [0, 3], concMgL: [0, 15.5] }]]),
    });
    const lines = text.trim().split('\n');
    expect(lines[0]).toBe('subject,time_h,event,amount_mg,duration_h,conc_mg_L,censored,lloq_mg_L,route,grid,weight_kg,sex');
    expect(lines).toContain('A1,23.5,level,,,0.75,0,0.5,,,70,F');
    expect(lines).toContain('B2,3,level,,,15.5,0,,,1,82.5,M');
    const back = parseCanonicalCsvDetailed(text);
    expect(back.skippedGridRows).toBe(2);
    expect(back.dataset.subjects[0].observations.map((o) => o.valueMgL)).toEqual([7.5, 0.75]);
  });
});

describe('parseCsvRecords', () => {
  it('handles a final line without a newline and a trailing comma', () => {
    const problems: DataProblem[] = [];
    expect(parseCsvRecords('a,"b"\nc,', problems)).toEqual([
      { line: 1, fields: ['a', 'b'], quoted: [false, true] },
      { line: 2, fields: ['c', ''], quoted: [false, false] },
    ]);
    expect(parseCsvRecords('a\rb\r', problems).map((r) => r.fields[0])).toEqual(['a', 'b']);
    expect(problems).toEqual([]);
  });
  it('reports text after a closing quote', () => {
    const problems: DataProblem[] = [];
    parseCsvRecords('"a"b,c\n', problems);
    expect(problems[0].message).toMatch(/after a closing quote/);
  });
});
