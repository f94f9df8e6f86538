/** The application service over a real project folder and real worker processes: every channel family end to end. */
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import * as XLSX from 'xlsx';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { QueueSnapshot, Result } from '../../../main/protocol/bridge.js';
import { AppService } from '../../../main/services/appService.js';
import { engineWorkerPath, ensureBuilt, repoRoot, resourcesDir } from './build.js';

let app: AppService;
const dir = mkdtempSync(path.join(tmpdir(), 'plateau-app-'));

beforeAll(async () => {
  ensureBuilt();
  app = await AppService.start({ workerEntry: engineWorkerPath, resourcesDir, projectDir: dir, host: 'web', concurrency: 1, log: () => undefined });
}, 300_000);
afterAll(async () => app?.close());

async function ok<T = any>(channel: string, payload?: unknown): Promise<T> {
  const r = (await app.handle(channel, payload)) as Result<T>;
  if (!r.ok) throw new Error(`${channel}: ${r.error.kind}: ${r.error.message} ${r.error.problems.join('; ')}`);
  return r.value;
}

describe('application service', () => {
  it('opens the demo project on first run and answers app.info', async () => {
    const info = await ok('app.info');
    expect(info).toMatchObject({ host: 'web', cautionAcknowledged: false, projectPath: dir });
    expect(info.caution.text).toMatch(/CAUTION/);
    const summary = await ok('project.summary');
    expect(summary.datasets).toHaveLength(1);
    expect(summary.datasets[0].subjects).toBeGreaterThan(10);
    expect(summary.models).toHaveLength(1);
    const ack = await ok('app.acknowledgeCaution');
    expect((await ok('app.info')).cautionAcknowledgedAt).toBe(ack.acknowledgedAt);
  });

  it('imports a spreadsheet in a worker, saves its template and adds it to the project', async () => {
    const bytes = readFileSync(path.join(repoRoot, 'tests/fixtures/import/ward7b_two_sheets.xlsx'));
    const preview = await ok('import.parse', { fileName: 'ward7b_two_sheets.xlsx', bytesBase64: bytes.toString('base64'), options: { dayFirst: true } });
    // Same counts as the import worker test (tests/integration/import/worker.test.ts).
    expect(preview.report.summary).toMatchObject({ patients: 8, doses: 14, levels: 10, censored: 2 });
    expect(preview.timeline).toHaveLength(8);
    expect(preview.sheets.length).toBeGreaterThanOrEqual(2);
    for (const sh of preview.sheets) {
      expect(sh.previewRows.length).toBeGreaterThan(0);
      expect(sh.previewRows.length).toBeLessThanOrEqual(50);
      // The header row as the spreadsheet shows it.
      expect(sh.previewRows[sh.headerRow - 1].filter(Boolean)).toEqual(sh.columns.map((c: { header: string }) => c.header).filter(Boolean));
    }
    const { templateId } = await ok('import.saveTemplate', { importId: preview.importId, name: 'Ward 7b export' });
    expect((await ok('import.templates')).map((t: { templateId: string }) => t.templateId)).toContain(templateId);
    const again = await ok('import.remap', { importId: preview.importId, mapping: preview.mapping });
    expect(again.report.summary).toEqual(preview.report.summary);
    if (preview.canAdd) {
      const { datasetId } = await ok('import.addToProject', { importId: preview.importId, name: 'Ward 7b' });
      const ds = await ok('dataset.get', { datasetId });
      expect(ds.subjects).toHaveLength(8);
    } else {
      const r = await app.handle('import.addToProject', { importId: preview.importId, name: 'Ward 7b' });
      expect(r.ok).toBe(false);
    }
  }, 60_000);

  it('refuses a damaged spreadsheet with a clear error, not a crash', async () => {
    const r = await app.handle('import.parse', { fileName: 'broken.xlsx', bytesBase64: Buffer.from('PK\u0003\u0004garbage').toString('base64') });
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error.kind).toBe('file');
  });

  it('queues a fit, streams progress, stores the fit and exports it', async () => {
    const summary = await ok('project.summary');
    const progress: string[] = [];
    const offP = app.subscribe('progress', (p) => progress.push(p.phase));
    const done = new Promise<QueueSnapshot>((resolve) => {
      const off = app.subscribe('queue', (s) => {
        if (s.jobs.length && s.jobs.every((j) => j.state === 'done' || j.state === 'failed')) {
          off();
          resolve(s);
        }
      });
    });
    const { jobId } = await ok('queue.enqueue', { datasetId: summary.datasets[0].id, modelId: summary.models[0].id, seeds: [5], settings: { searchMinIterations: 40, searchMaxIterations: 60, averagingIterations: 30 } });
    const snap = await done;
    offP();
    const job = snap.jobs.find((j) => j.id === jobId)!;
    expect(job.state).toBe('done');
    expect(progress).toContain('search');
    expect(progress).toContain('post-fit');
    const fit = await ok('fits.get', { fitId: job.fitId });
    expect(fit.record.format).toBe('plateau-fit');
    expect(fit.record.seed).toBe(5);
    const xlsx = await ok('fits.exportXlsx', { fitId: job.fitId });
    const wb = XLSX.read(Buffer.from(xlsx.bytesBase64, 'base64'));
    expect(wb.SheetNames).toEqual(['Estimates', 'Individual', 'Levels', 'Fit', 'Warnings']);
    // Every level of the fit with its predictions, as the fit record holds them.
    const levels = XLSX.utils.sheet_to_json<Record<string, unknown>>(wb.Sheets.Levels);
    const record = (await ok('fits.get', { fitId: job.fitId })).record as { nObservations: number; diagnostics: { observations: Array<{ subject: string; ipred: number }> } };
    expect(levels.length).toBe(record.nObservations);
    expect(levels[0]).toMatchObject({ Subject: record.diagnostics.observations[0].subject, 'IPRED (mg/L)': record.diagnostics.observations[0].ipred });
    expect((await ok('project.summary')).fits).toHaveLength(1);

    // Dose advice from that fit, for the demo patient, carries the caution and the model's provenance.
    const patient = JSON.parse(readFileSync(path.join(resourcesDir, 'demo/patient.json'), 'utf8'));
    const advice = await ok('dosing.advise', { prior: { fitId: job.fitId }, patient, target: 'vancomycin-auc24', options: { seed: 2, draws: 300 } });
    expect(advice.caution).toMatch(/CAUTION/);
    expect(['advice', 'blocked', 'blocked-shown-on-request']).toContain(advice.status);
    const { sessionId } = await ok('dosing.saveSession', { advice, reviewer: 'pharmacist on duty' });
    expect((await ok('project.summary')).dosingSessions.map((s: { id: string }) => s.id)).toEqual([sessionId]);
    const audit = await app.store.readAudit();
    expect(audit.map((a) => a.action)).toEqual(expect.arrayContaining(['project.create', 'dataset.add', 'model.save', 'fit.save', 'dosing.save', 'caution.acknowledge']));
    for (const a of audit) expect(typeof a.who).toBe('string');
  }, 120_000);

  it('lists targets and literature models with their sources', async () => {
    const targets = await ok('dosing.targets');
    expect(targets.map((t: { id: string }) => t.id)).toContain('vancomycin-auc24');
    for (const t of targets) expect(t.source.length).toBeGreaterThan(10);
    const models = await ok('dosing.literatureModels');
    expect(models.length).toBeGreaterThan(0);
    expect(models[0].name).toMatch(/not for clinical use/);
    const cat = await ok('models.catalogue');
    expect(cat.map((m: { id: string }) => m.id)).toEqual(expect.arrayContaining(['1cmt', '2cmt']));
  });

  it('answers wire envelopes, and malformed ones with a usage error', async () => {
    expect(await app.handleEnvelope({ id: 'r1', channel: 'queue.list', payload: {} })).toMatchObject({ id: 'r1', ok: true, value: { jobs: expect.any(Array) } });
    expect(await app.handleEnvelope({ id: 'r2', channel: 'queue.list', payload: {}, extra: 1 })).toMatchObject({ id: 'r2', ok: false, error: { kind: 'usage' } });
    expect(await app.handleEnvelope(JSON.parse('{"id":"r3","channel":"app.info","__proto__":{}}'))).toMatchObject({ id: 'r3', ok: false });
    expect(await app.handleEnvelope('nonsense')).toMatchObject({ id: '', ok: false, error: { kind: 'usage' } });
  });

  it('answers bad requests with usage errors', async () => {
    for (const [c, p] of [
      ['fits.get', { fitId: 'f-nope' }],
      ['nope', {}],
      ['queue.enqueue', { datasetId: 'x', modelId: 'y', seeds: [-1] }],
      ['models.save', { name: 'bad', spec: { structure: 'nope' } }],
    ] as const) {
      const r = await app.handle(c, p);
      expect(r.ok).toBe(false);
      if (!r.ok) expect(['usage', 'spec']).toContain(r.error.kind);
    }
  });
});
