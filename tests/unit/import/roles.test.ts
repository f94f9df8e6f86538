import { describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { readWorkbook } from '../../../engine/import/workbook.js';
import { suggestMapping, suggestSheet, parseTemplate, bindTemplate, TemplateError, unitFromHeader, type MappingTemplate } from '../../../engine/import/roles.js';
import { importWorkbook } from '../../../engine/import/build.js';

function book(sheets: [string, unknown[][]][]) {
  const wb = XLSX.utils.book_new();
  for (const [name, rows] of sheets) XLSX.utils.book_append_sheet(wb, XLSX.utils.aoa_to_sheet(rows), name);
  return readWorkbook(new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'xlsx' }) as ArrayBuffer));
}

// INVENTED rows for tests.
const doseRows = [
  ['Patient number', 'Date/time given', 'Dose (mg)', 'Route', 'Duration (min)'],
  ['X1', '2024-05-01 08:00', 1000, 'IV infusion', 60],
  ['X1', '2024-05-01 20:00', 1000, 'IV infusion', 60],
];
const levelRows = [
  ['Hospital number', 'Sample date', 'Sample time', 'Vancomycin', 'Unit', 'Comment'],
  ['X1', '2024-05-01', '19:30', 12.1, 'mg/L', ''],
];

describe('role suggestions', () => {
  it('maps common English headers and units written in headers', () => {
    const m = book([['Doses', doseRows], ['Levels', levelRows]]);
    const { template } = suggestMapping(m);
    const roles = template.sheets.map((s) => [s.sheet, s.content, s.columns.map((c) => `${c.role}${c.unit ? `[${c.unit}]` : ''}`)]);
    expect(roles).toEqual([
      ['Doses', 'doses', ['patientId', 'dateTime', 'doseAmount[mg]', 'route', 'infusionDuration[min]']],
      ['Levels', 'levels', ['patientId', 'date', 'time', 'levelValue', 'levelUnit', 'comment']],
    ]);
    expect(unitFromHeader('Creatinine, umol/L')).toBe('umol/L');
    expect(unitFromHeader('Level [µg/mL]')).toBe('µg/mL');
    expect(unitFromHeader('Patient')).toBeUndefined();
  });

  it('leaves out sheets with no patient data', () => {
    const m = book([['Notes', [['Free text'], ['nothing here']]]]);
    expect(suggestSheet(m.sheets[0]).mapping).toBeUndefined();
  });
});

describe('templates', () => {
  it('validates template JSON with paths', () => {
    expect(() => parseTemplate({})).toThrow(TemplateError);
    let err: unknown;
    try {
      parseTemplate({ format: 'plateau-import-mapping', version: 2, sheets: [{ sheet: 'S', content: 'x', headerRow: 0, columns: [{ role: 'nope', header: 1 }] }], options: { dateOrder: 'sideways', maxGapH: -1 } });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(TemplateError);
    {
      const p = (err as TemplateError).problems.join('\n');
      expect(p).toContain('$.version');
      expect(p).toContain('$.sheets[0].content');
      expect(p).toContain('$.sheets[0].headerRow');
      expect(p).toContain('$.sheets[0].columns[0].role');
      expect(p).toContain('$.sheets[0].columns[0].header');
      expect(p).toContain('$.options.dateOrder');
      expect(p).toContain('$.options.maxGapH');
    }
    const m = book([['Doses', doseRows]]);
    const { template } = suggestMapping(m);
    expect(parseTemplate(JSON.parse(JSON.stringify(template)))).toEqual(template);
  });

  it('finds moved columns and header rows, reports missing columns and changed types', () => {
    const m = book([['Doses', doseRows], ['Levels', levelRows]]);
    const { template } = suggestMapping(m);
    const saved: MappingTemplate = JSON.parse(JSON.stringify(template));
    // Next month: a title row above, columns in another order, "Route" gone, duration as text.
    const moved = book([
      ['Doses', [['Export May (INVENTED)'], ['Duration (min)', 'Dose (mg)', 'Patient number', 'Date/time given'], ['sixty', 1000, 'X1', '2024-06-01 08:00'], ['sixty', 1000, 'X1', '2024-06-01 20:00']]],
      ['Levels', levelRows],
    ]);
    const { bound, problems } = bindTemplate(moved, saved);
    expect(bound).toHaveLength(2);
    expect(bound[0].columns.get('doseAmount')!.index).toBe(1);
    expect(bound[0].headerIndex).toBe(1);
    const msgs = problems.map((p) => `${p.sheet}:${p.row}:${p.severity}:${p.message}`);
    expect(msgs.some((s) => s.startsWith('Doses:2:warning:the header row moved'))).toBe(true);
    expect(msgs.some((s) => s.includes('warning:column "Route" (route) is not in the header row'))).toBe(true);
    expect(msgs.some((s) => s.includes('"Duration (min)" held number values') && s.includes('now holds text'))).toBe(true);
    // And a missing essential column stops the sheet with an error.
    const noLevel = book([['Doses', doseRows], ['Levels', [['Hospital number', 'Sample date', 'Sample time'], ['X1', '2024-05-01', '19:30']]]]);
    const r = bindTemplate(noLevel, saved);
    expect(r.bound.map((b) => b.sheet.name)).toEqual(['Doses']);
    expect(r.problems.find((p) => p.severity === 'error')?.message).toMatch(/"Vancomycin" \(levelValue\) is not in the header row/);
    // A sheet that is gone.
    const gone = book([['Doses', doseRows]]);
    expect(bindTemplate(gone, saved).problems.find((p) => p.sheet === 'Levels')?.message).toMatch(/sheet "Levels" is not in the file/);
  });

  it('imports with a hand-written template and a fixed unit', () => {
    const m = book([['S', [['id', 't', 'amt', 'conc'], ['a', 0, 500, null], ['a', 2, null, '1,5']]]]);
    const t = parseTemplate({
      format: 'plateau-import-mapping',
      version: 1,
      sheets: [{ sheet: 'S', content: 'events', headerRow: 1, columns: [
        { role: 'patientId', header: 'id' }, { role: 'elapsedH', header: 't' }, { role: 'doseAmount', header: 'amt', unit: 'g' }, { role: 'levelValue', header: 'conc', unit: 'ng/mL' },
      ] }],
      options: { defaultRoute: 'oral' },
    });
    const r = importWorkbook(m, t);
    expect(r.report.problems).toEqual([]);
    const s = r.dataset!.subjects[0];
    expect(s.doses[0]).toMatchObject({ timeH: 0, amountMg: 500_000, route: 'oral', durationH: 0 });
    expect(s.observations[0]).toMatchObject({ timeH: 2, valueMgL: 0.0015, censored: false });
  });

  it('validates option overrides and ignores unknown keys', async () => {
    const { analyseWorkbook } = await import('../../../engine/import/analyse.js');
    const bytes = new TextEncoder().encode('patient,date time,dose mg,route\nA,2024-01-01 08:00,100,oral\n');
    const hostile = JSON.parse('{"__proto__": {"polluted": 1}, "dateOrder": "dayFirst"}');
    const a = analyseWorkbook(bytes, { options: hostile });
    expect(a.mapping.options.dateOrder).toBe('dayFirst');
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
    expect(() => analyseWorkbook(bytes, { options: { maxGapH: -5 } })).toThrow(TemplateError);
    const none = analyseWorkbook(new TextEncoder().encode('just,text\nno,data\n'));
    expect(none.report.problems[0].message).toMatch(/no sheet with a patient id/);
  });
});
