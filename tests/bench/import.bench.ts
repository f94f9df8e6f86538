/**
 * Benchmark of the spreadsheet import: a two-sheet export (MAR doses with text day-first
 * date-times, lab levels with date and time cells; INVENTED data, 1,000 patients) imported and
 * validated, end to end through the worker process, and in-process split into reading and
 * building. Figures only; nothing here is asserted.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import * as path from 'node:path';
import * as XLSX from 'xlsx';
import { readWorkbook } from '../../engine/import/workbook.js';
import { suggestMapping } from '../../engine/import/roles.js';
import { importWorkbook } from '../../engine/import/build.js';
import { importSpreadsheetFile } from '../../main/services/importService.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

const p2 = (n: number) => String(n).padStart(2, '0');

/** INVENTED export: `rows` rows in total, half doses, half levels, 1,000 patients. */
export function makeExport(rows: number): Uint8Array {
  const patients = 1000;
  const perSheet = Math.floor(rows / 2);
  const perPatient = Math.ceil(perSheet / patients);
  const mar: unknown[][] = [['Northfield General Hospital (INVENTED DATA) - MAR export'], [], ['Patient ID', 'Administered', 'Dose', 'Unit', 'Route', 'Infusion end', 'Comment']];
  const lab: unknown[][] = [['Laboratory results (INVENTED DATA)'], ['MRN', 'Collection date', 'Collection time', 'Result', 'Units', 'LLOQ', 'Sample comment']];
  const labDates: [number, number, number][] = [];
  for (let p = 0; p < patients && mar.length - 3 < perSheet; p++) {
    const id = `B-${String(p).padStart(4, '0')}`;
    const start = Date.UTC(2024, 0, 1 + (p % 300), 8);
    for (let k = 0; k < perPatient && mar.length - 3 < perSheet; k++) {
      const t = new Date(start + k * 12 * 3_600_000);
      const e = new Date(t.getTime() + 3_600_000);
      const fmt = (d: Date) => `${p2(d.getUTCDate())}/${p2(d.getUTCMonth() + 1)}/${d.getUTCFullYear()} ${p2(d.getUTCHours())}:${p2(d.getUTCMinutes())}`;
      mar.push([id, fmt(t), 1000, 'mg', 'IV infusion', fmt(e), '']);
      const lt = t.getTime() + 11.5 * 3_600_000;
      const serial = lt / 86_400_000 + 25569;
      lab.push([id, Math.floor(serial), serial - Math.floor(serial), k % 17 === 0 ? '<2.0' : 5 + (k % 20), 'mg/L', 1, k % 50 === 0 ? 'haemolysed' : '']);
      labDates.push([lab.length - 1, Math.floor(serial), serial - Math.floor(serial)]);
    }
  }
  const wsMar = XLSX.utils.aoa_to_sheet(mar);
  const wsLab = XLSX.utils.aoa_to_sheet(lab);
  for (const [r, d, f] of labDates) {
    wsLab[XLSX.utils.encode_cell({ r, c: 1 })] = { t: 'n', v: d, z: 'dd/mm/yyyy' };
    wsLab[XLSX.utils.encode_cell({ r, c: 2 })] = { t: 'n', v: f, z: 'hh:mm' };
  }
  const wb = XLSX.utils.book_new();
  XLSX.utils.book_append_sheet(wb, wsMar, 'MAR export');
  XLSX.utils.book_append_sheet(wb, wsLab, 'Lab results');
  return new Uint8Array(XLSX.write(wb, { type: 'array', bookType: 'xlsx', compression: true }) as ArrayBuffer);
}

async function timeIt<T>(fn: () => Promise<T> | T): Promise<[number, T]> {
  const t0 = performance.now();
  const r = await fn();
  return [(performance.now() - t0) / 1000, r];
}

export const suite = {
  name: 'import',
  run: async (): Promise<Figure[]> => {
    const figures: Figure[] = [];
    const dir = mkdtempSync(path.join(tmpdir(), 'plateau-bench-import-'));
    try {
      for (const rows of [50_000, 100_000]) {
        const bytes = makeExport(rows);
        const file = path.join(dir, `export_${rows}.xlsx`);
        writeFileSync(file, bytes);
        const cpu0 = process.cpuUsage();
        const [endToEnd, out] = await timeIt(() => importSpreadsheetFile(file, { options: { dateOrder: 'dayFirst' } }));
        const cpuMain = process.cpuUsage(cpu0);
        const s = out.report.summary;
        const workerCpuS = (out.workerTiming?.cpuMs ?? NaN) / 1000;
        const mainCpuS = (cpuMain.user + cpuMain.system) / 1e6;
        figures.push({
          name: `${rows.toLocaleString('en')}-row two-sheet export, imported and validated (worker, end to end, wall clock)`,
          value: endToEnd,
          unit: 's',
          ...(rows === 50_000 ? { target: '< 3' } : {}),
          note: `${(bytes.length / 1048576).toFixed(1)} MB .xlsx; ${s.patients} patients, ${s.doses} doses, ${s.levels} levels, ${s.excludedRows} excluded, ${out.report.problems.length} problems; load average ${loadavg()[0].toFixed(1)} on ${cpus().length} CPUs`,
        });
        figures.push({
          name: `${rows.toLocaleString('en')} rows: CPU time, worker (parse + check) + main (read file, re-validate)`,
          value: workerCpuS + mainCpuS,
          unit: 's',
          note: `worker ${workerCpuS.toFixed(2)} s, main ${mainCpuS.toFixed(2)} s; about what the wall clock shows on an idle machine`,
        });
        if (rows === 50_000) {
          const c1 = process.cpuUsage();
          const [readS, model] = await timeIt(() => readWorkbook(bytes));
          const c2 = process.cpuUsage(c1);
          const template = { ...suggestMapping(model).template };
          template.options = { ...template.options, dateOrder: 'dayFirst' };
          const c3 = process.cpuUsage();
          const [buildS] = await timeIt(() => importWorkbook(model, template));
          const c4 = process.cpuUsage(c3);
          const c5 = process.cpuUsage();
          const [sheetJsS] = await timeIt(() => readWorkbook(bytes, { sheetJsOnly: true }));
          const c6 = process.cpuUsage(c5);
          const cpuS = (c: NodeJS.CpuUsage) => ((c.user + c.system) / 1e6).toFixed(2);
          figures.push({ name: '50,000 rows: read .xlsx into the sheet model (direct reader), in-process', value: readS, unit: 's', note: `CPU ${cpuS(c2)} s` });
          figures.push({ name: '50,000 rows: the same read through SheetJS (fallback path), in-process', value: sheetJsS, unit: 's', note: `CPU ${cpuS(c6)} s` });
          figures.push({ name: '50,000 rows: map, check and build the dataset, in-process', value: buildS, unit: 's', note: `CPU ${cpuS(c4)} s` });
        }
      }
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
    return figures;
  },
};
