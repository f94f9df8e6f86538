/** Data minimisation: columns that identify a person never become covariates (INVENTED rows). */
import { describe, expect, it } from 'vitest';
import * as XLSX from 'xlsx';
import { readWorkbook } from '../../../engine/import/workbook.js';
import { suggestMapping } from '../../../engine/import/roles.js';

function book(rows: unknown[][]) {
  const wb = XLSX.utils.book_new();
  XLSX.utils.book_append_sheet(wb, XLSX.utils.aoa_to_sheet(rows), 'Levels');
  return readWorkbook(new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'xlsx' }) as ArrayBuffer));
}

describe('identifying columns', () => {
  it('are left out with a note, while other unknown columns become covariates', () => {
    const m = book([
      ['Patient ID', 'Surname', 'Address', 'Ward', 'Sample date/time', 'Vancomycin (mg/L)'],
      ['X1', 'Invented', '1 Nowhere Lane', '7B', '2024-05-01 19:30', 12.1],
      ['X2', 'Madeup', '2 Nowhere Lane', '7C', '2024-05-02 07:30', 9.4],
    ]);
    const cols = suggestMapping(m).template.sheets[0].columns;
    const byHeader = (h: string) => cols.find((c) => c.header === h)!;
    for (const h of ['Surname', 'Address']) {
      expect(byHeader(h).role).toBe('ignore');
      expect(byHeader(h).note).toMatch(/identifying/);
    }
    expect(byHeader('Ward')).toMatchObject({ role: 'covariate', name: 'ward' });
    expect(byHeader('Patient ID').role).toBe('patientId');
  });
});
