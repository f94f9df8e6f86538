import { describe, expect, it } from 'vitest';
import type { Cell } from '../../../engine/import/workbook.js';
import {
  buildCommentMatcher,
  clockChangesBetween,
  clockChangesOfYear,
  creatinineFactorToUmolL,
  CREATININE_MOLAR_MASS_G_PER_MOL,
  CREATININE_UMOL_L_PER_MG_DL,
  DEFAULT_EXCLUDE_WORDS,
  doseFactorToMg,
  inSkippedHour,
  levelFactorToMgL,
  lookupMolarMass,
  parseDateCell,
  parseKind,
  parseLevelCell,
  parseNumberText,
  parseRoute,
  parseSex,
  parseTimeCell,
  serialToWallMs,
  weightFactorToKg,
} from '../../../engine/import/values.js';

const text = (s: string): Cell => ({ kind: 'text', raw: s, text: s });
const num = (n: number): Cell => ({ kind: 'number', raw: n, text: String(n) });
const date = (n: number): Cell => ({ kind: 'date', raw: n, text: String(n) });
const value = <T>(p: { ok: true; value: T } | { ok: false; message: string }): T => {
  if (!p.ok) throw new Error(p.message);
  return p.value;
};

describe('numbers', () => {
  it('reads dot and comma decimals, and refuses what it cannot tell apart', () => {
    expect(value(parseNumberText('12.5'))).toBe(12.5);
    expect(value(parseNumberText('12,5'))).toBe(12.5);
    expect(value(parseNumberText(' 1 250 '))).toBe(1250);
    expect(value(parseNumberText('1.250,5'))).toBe(1250.5);
    expect(value(parseNumberText('1,250.5'))).toBe(1250.5);
    expect(value(parseNumberText('-3'))).toBe(-3);
    const amb = parseNumberText('1,500');
    expect(amb.ok).toBe(false);
    expect(value(parseNumberText('1,500', 'comma'))).toBe(1.5);
    expect(value(parseNumberText('1,500', 'dot'))).toBe(1500);
    expect(value(parseNumberText('1.500', 'comma'))).toBe(1500);
    expect(parseNumberText('12 mg').ok).toBe(false);
    expect(parseNumberText('').ok).toBe(false);
  });
});

describe('levels and censoring', () => {
  it('reads "<2.0", "< 2,0", BLQ, ND, "< LOQ" as censored and refuses ">100"', () => {
    expect(value(parseLevelCell(text('<2.0'), 'auto'))).toEqual({ kind: 'censored', limit: 2, text: '<2.0' });
    expect(value(parseLevelCell(text('< 2,0'), 'auto'))).toMatchObject({ kind: 'censored', limit: 2 });
    expect(value(parseLevelCell(text('<=0.5'), 'auto'))).toMatchObject({ kind: 'censored', limit: 0.5 });
    for (const s of ['BLQ', 'ND', '< LOQ', '<LLOQ', 'not detected', 'below LLOQ', 'n.d.'])
      expect(value(parseLevelCell(text(s), 'auto')), s).toEqual({ kind: 'censored', text: s });
    expect(parseLevelCell(text('>100'), 'auto').ok).toBe(false);
    expect(value(parseLevelCell(num(12.4), 'auto'))).toEqual({ kind: 'value', value: 12.4 });
    expect(value(parseLevelCell(text('12,4'), 'auto'))).toEqual({ kind: 'value', value: 12.4 });
    expect(parseLevelCell(text('see comment'), 'auto').ok).toBe(false);
  });
});

describe('units', () => {
  it('converts level units to mg/L', () => {
    // SI prefixes: 1 ug/mL = 1 mg/L; 1 ng/mL = 1 ug/L = 0.001 mg/L (common practice)
    expect(value(levelFactorToMgL('mg/L'))).toBe(1);
    expect(value(levelFactorToMgL('µg/mL'))).toBe(1);
    expect(value(levelFactorToMgL('mcg/mL'))).toBe(1);
    expect(value(levelFactorToMgL('ng/mL'))).toBe(0.001);
    expect(value(levelFactorToMgL('ug/L'))).toBe(0.001);
    expect(value(levelFactorToMgL('mg/dL'))).toBe(10);
    expect(levelFactorToMgL('umol/L').ok).toBe(false); // needs the molar mass
    expect(levelFactorToMgL('').ok).toBe(false);
    expect(levelFactorToMgL('mmol/mL').ok).toBe(false);
  });

  it('converts molar levels with the molar mass (PubChem values, from memory)', () => {
    // vancomycin 1449.3 g/mol (PubChem CID 14969, from memory): 1 umol/L = 1.4493 mg/L
    expect(lookupMolarMass('Vancomycin')).toBe(1449.3);
    expect(value(levelFactorToMgL('umol/L', 1449.3))).toBeCloseTo(1.4493, 12);
    expect(value(levelFactorToMgL('µmol/l', 1449.3))).toBeCloseTo(1.4493, 12);
    expect(value(levelFactorToMgL('nmol/L', 1449.3))).toBeCloseTo(0.0014493, 12);
    // gentamicin C1 477.6 g/mol (PubChem, from memory)
    expect(lookupMolarMass('gentamicin')).toBe(477.6);
    expect(lookupMolarMass('unknownium')).toBeUndefined();
  });

  it('converts creatinine: 88.4 umol/L per mg/dL, from its molar mass 113.12 g/mol (PubChem CID 588, from memory)', () => {
    // 1 mg/dL = 10 mg/L; 10 mg/L / 113.12 g/mol = 0.0884 mmol/L = 88.4 umol/L
    expect((10 / CREATININE_MOLAR_MASS_G_PER_MOL) * 1000).toBeCloseTo(CREATININE_UMOL_L_PER_MG_DL, 1);
    expect(value(creatinineFactorToUmolL('mg/dL'))).toBe(88.4);
    expect(value(creatinineFactorToUmolL('µmol/L'))).toBe(1);
    expect(value(creatinineFactorToUmolL('mmol/L'))).toBe(1000);
    expect(creatinineFactorToUmolL('').ok).toBe(false);
  });

  it('converts dose and weight units', () => {
    expect(value(doseFactorToMg('g'))).toBe(1000);
    expect(value(doseFactorToMg('mcg'))).toBe(0.001);
    expect(doseFactorToMg('tabs').ok).toBe(false);
    expect(doseFactorToMg('mg/kg').ok).toBe(false);
    // international avoirdupois pound = 0.45359237 kg exactly (International Yard and Pound Agreement 1959, from memory)
    expect(value(weightFactorToKg('lb'))).toBe(0.45359237);
  });
});

describe('dates and times', () => {
  it('decodes Excel serials without a time zone (ECMA-376 1900 date system, from memory)', () => {
    // 25569 = 1970-01-01 (common practice: the Unix epoch in Excel serials)
    expect(serialToWallMs(25569)).toBe(0);
    // 61 = 1900-03-01 (serial 60 is Excel's non-existent 1900-02-29, from memory)
    expect(new Date(serialToWallMs(61)!).toISOString().slice(0, 10)).toBe('1900-03-01');
    expect(new Date(serialToWallMs(45382.5)!).toISOString()).toBe('2024-03-31T12:00:00.000Z');
    const d = value(parseDateCell(date(45382.104166666664), 'auto'));
    expect(new Date(d.ms).toISOString()).toBe('2024-03-31T02:30:00.000Z');
    expect(d.hasTime).toBe(true);
  });

  it('reads text dates in the chosen order and reports ambiguity', () => {
    expect(new Date(value(parseDateCell(text('2024-03-31 14:30'), 'auto')).ms).toISOString()).toBe('2024-03-31T14:30:00.000Z');
    expect(new Date(value(parseDateCell(text('03/04/2024 08:00'), 'dayFirst')).ms).toISOString()).toBe('2024-04-03T08:00:00.000Z');
    expect(new Date(value(parseDateCell(text('03/04/2024 08:00'), 'monthFirst')).ms).toISOString()).toBe('2024-03-04T08:00:00.000Z');
    expect(value(parseDateCell(text('03/04/2024'), 'auto')).order).toBe('either');
    expect(value(parseDateCell(text('31/03/2024'), 'auto')).order).toBe('dayFirstOnly');
    expect(value(parseDateCell(text('03/31/2024'), 'auto')).order).toBe('monthFirstOnly');
    expect(parseDateCell(text('31/03/2024'), 'monthFirst').ok).toBe(false);
    expect(parseDateCell(text('31/02/2024'), 'dayFirst').ok).toBe(false);
    expect(new Date(value(parseDateCell(text('28.03.24 7.50'), 'dayFirst')).ms).toISOString()).toBe('2024-03-28T07:50:00.000Z');
    expect(new Date(value(parseDateCell(text('03/04/2024 2:30 PM'), 'monthFirst')).ms).toISOString()).toBe('2024-03-04T14:30:00.000Z');
    expect(parseDateCell(text('2024-03-31T10:00+02:00'), 'auto').ok).toBe(false); // offsets refused: times are as written
    expect(parseDateCell(num(12.5), 'auto').ok).toBe(true);
    expect(parseDateCell(num(0.5), 'auto').ok).toBe(false);
  });

  it('reads times of day', () => {
    expect(value(parseTimeCell(text('14:30')))).toBe(52_200_000);
    expect(value(parseTimeCell(text('2:30 pm')))).toBe(52_200_000);
    expect(value(parseTimeCell(text('12:00 AM')))).toBe(0);
    expect(value(parseTimeCell(text('0830')))).toBe(30_600_000);
    expect(value(parseTimeCell(date(0.75)))).toBe(64_800_000);
    expect(parseTimeCell(text('25:00')).ok).toBe(false);
  });

  it('knows the clock-change dates (EU Directive 2000/84/EC; US Energy Policy Act 2005; from memory)', () => {
    // EU 2024: 31 March and 27 October; US 2024: 10 March and 3 November (from memory)
    expect(clockChangesOfYear(2024, 'eu').map((c) => [c.date, c.shiftH])).toEqual([['2024-03-31', 1], ['2024-10-27', -1]]);
    expect(clockChangesOfYear(2024, 'us').map((c) => [c.date, c.shiftH])).toEqual([['2024-03-10', 1], ['2024-11-03', -1]]);
    expect(clockChangesOfYear(2023, 'eu').map((c) => c.date)).toEqual(['2023-03-26', '2023-10-29']);
    const start = Date.UTC(2024, 2, 30, 20);
    expect(clockChangesBetween(start, Date.UTC(2024, 2, 31, 7, 30), 'eu')).toHaveLength(1);
    expect(clockChangesBetween(start, Date.UTC(2024, 2, 31, 1, 30), 'eu')).toHaveLength(0);
    expect(clockChangesBetween(start, Date.UTC(2024, 2, 31, 7, 30), 'none')).toHaveLength(0);
    expect(inSkippedHour(Date.UTC(2024, 2, 31, 2, 30), 'eu')?.date).toBe('2024-03-31');
    expect(inSkippedHour(Date.UTC(2024, 2, 31, 3, 0), 'eu')).toBeUndefined();
  });
});

describe('words', () => {
  it('finds exclusion comments as whole words, accents folded, negations kept', () => {
    const m = buildCommentMatcher(DEFAULT_EXCLUDE_WORDS);
    expect(m('Haemolysed sample')).toBe('haemolysed');
    expect(m('HEMOLYZED')).toBe('hemolyzed');
    expect(m('Probe hämolysiert')).toBe('hamolysiert');
    expect(m('sample not received by lab')).toBeDefined();
    expect(m('not haemolysed')).toBeUndefined();
    expect(m('nicht hämolysiert')).toBeUndefined();
    expect(m('trough, ok')).toBeUndefined();
    expect(m('closet')).toBeUndefined(); // "clot" only as a word
    expect(m('Not given - patient in theatre')).toBe('not given');
  });

  it('reads routes, sexes and event kinds', () => {
    expect(parseRoute('IV infusion')).toBe('infusion');
    expect(parseRoute('i.v. Infusion')).toBe('infusion');
    expect(parseRoute('IV')).toBe('bolus');
    expect(parseRoute('PO')).toBe('oral');
    expect(parseRoute('oral tablet')).toBe('oral');
    expect(parseRoute('intrathecal')).toBeUndefined();
    expect(parseSex('female')).toBe('F');
    expect(parseSex('M')).toBe('M');
    expect(parseSex('weiblich')).toBe('F');
    expect(parseSex('1')).toBeUndefined();
    expect(parseKind('Dose')).toBe('dose');
    expect(parseKind('Gabe')).toBe('dose');
    expect(parseKind('Level')).toBe('level');
    expect(parseKind('Spiegel')).toBe('level');
    expect(parseKind('Note')).toBeUndefined();
  });
});
