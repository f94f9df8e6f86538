/** Row-level rules of the import on small hand-made sheets (INVENTED rows). */
import { describe, expect, it } from 'vitest';
import { analyseWorkbook } from '../../../engine/import/analyse.js';
import type { ImportOptions } from '../../../engine/import/roles.js';

const csv = (lines: string[]) => new TextEncoder().encode(lines.join('\n') + '\n');
const run = (lines: string[], options: Partial<ImportOptions> = {}) => analyseWorkbook(csv(lines), { options });
const at = (a: ReturnType<typeof run>, row: number) => a.report.problems.filter((p) => p.row === row).map((p) => `${p.severity}: ${p.message}`).join(' | ');

describe('doses', () => {
  it('derives infusion durations from a rate, from start and end, and from an end time after midnight', () => {
    const a = run([
      'patient,date time,dose mg,route,rate (mg/h),infusion end',
      'A,2024-05-01 08:00,1000,iv infusion,500,',
      'A,2024-05-01 23:30,1000,iv infusion,,00:30',
      'A,2024-05-02 12:00,1000,iv infusion,,2024-05-02 13:30',
      'A,2024-05-02 14:00,5,mg,,',
    ], { defaultRoute: 'oral' });
    const d = a.dataset!.subjects[0].doses;
    expect(d.map((x) => [x.timeH, x.route, x.durationH])).toEqual([[0, 'infusion', 2], [15.5, 'infusion', 1], [28, 'infusion', 1.5]]);
    expect(at(a, 3)).toContain('warning: the infusion end (a time of day only) is before the start: taken as the next day');
    expect(at(a, 5)).toContain('route "mg" is not known');
  });

  it('reads elapsed hours in minutes and keeps them unshifted; refuses mixed time bases', () => {
    const a = run(['id,elapsed (min),dose mg,route', 'A,30,100,oral', 'A,90,100,oral']);
    expect(a.dataset!.subjects[0].doses.map((x) => x.timeH)).toEqual([0.5, 1.5]);
    const b = analyseWorkbook(
      csv(['id,date time,elapsed (h),dose mg,route', 'A,2024-05-01 08:00,,100,oral', 'A,2024-05-01 20:00,,100,oral', 'A,,3,100,oral']),
    );
    expect(at(b, 4)).toContain('mixes date-times and elapsed hours');
  });
});

describe('levels', () => {
  it('censors at the stated limit, the LLOQ column, or the default LLOQ, and converts molar units by drug name', () => {
    const a = run(
      ['patient,date time,dose mg,route,level,unit,lloq', 'A,2024-05-01 08:00,1000,oral,,,', 'A,2024-05-01 10:00,,,BLQ,umol/L,0.5', 'A,2024-05-01 12:00,,,ND,mg/L,', 'A,2024-05-01 14:00,,,"<1,5",mg/L,', 'A,2024-05-01 16:00,,,10,umol/L,'],
      { drug: 'vancomycin', defaultLloqMgL: 0.8 },
    );
    const o = a.dataset!.subjects[0].observations;
    // umol/L x 1449.3 g/mol / 1000 = mg/L (vancomycin, PubChem, from memory)
    expect(o.map((x) => [x.censored, +x.valueMgL.toFixed(6)])).toEqual([[true, +(0.5 * 1.4493).toFixed(6)], [true, 0.8], [true, 1.5], [false, 14.493]]);
  });

  it('keeps a censored pre-dose level with a warning, warns on two different levels at one time', () => {
    const a = run(['patient,date time,dose mg,route,level mg/L,lloq', 'A,2024-05-01 07:00,,,<0.5,0.5', 'A,2024-05-01 08:00,500,oral,,', 'A,2024-05-01 10:00,,,4.2,', 'A,2024-05-01 10:00,,,4.4,']);
    expect(at(a, 2)).toContain('warning: the level is before the first dose');
    expect(a.dataset!.subjects[0].observations).toHaveLength(3);
    expect(at(a, 5)).toContain('a second level at the same time');
  });
});

describe('covariates and clocks', () => {
  it('computes age at the first event from the birth date and warns when weight changes', () => {
    const a = run(['patient,date time,dose mg,route,date of birth,weight', 'A,2024-05-01 08:00,500,oral,2000-05-01,70', 'A,2024-05-02 08:00,500,oral,2000-05-01,75']);
    const s = a.dataset!.subjects[0];
    expect(s.covariates.age_y).toBeCloseTo(24, 1);
    expect(s.covariates.weight_kg).toBe(70);
    expect(at(a, 3)).toContain("patient A's weight_kg changes");
  });

  it('uses the US clock-change calendar when asked (second Sunday of March 2024 = 10 March, from memory)', () => {
    const lines = ['patient,date time,dose mg,route', 'A,2024-03-09 20:00,500,oral', 'A,2024-03-10 08:00,500,oral'];
    expect(at(run(lines, { clockChanges: 'us' }), 3)).toContain('clocks went forward on 2024-03-10 (US rule)');
    expect(at(run(lines, { clockChanges: 'eu' }), 3)).toBe('');
    const r = run(lines, { clockChanges: 'us' });
    expect(r.dataset!.subjects[0].doses[1].timeH).toBe(12); // as written
  });
});
