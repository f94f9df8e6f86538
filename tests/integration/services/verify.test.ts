/**
 * verify.run over the real application service: the quick suite of resources/validation runs in
 * an engine worker process, each check's start and end arrive as verify-progress events, the
 * report and its HTML are saved in the project with an audit entry, and verify.cancel stops a
 * run. The checks' own reference values and sources are the suite's (resources/validation).
 */
import { cpSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Result, VerificationRun, VerificationRunSummary, VerifyProgressEvent } from '../../../main/protocol/bridge.js';
import { AppService } from '../../../main/services/appService.js';
import { engineWorkerPath, ensureBuilt, repoRoot, resourcesDir } from './build.js';

let app: AppService;
const dir = mkdtempSync(path.join(tmpdir(), 'plateau-verify-'));
const engineDir = path.join(repoRoot, 'dist', 'engine');
const suite = JSON.parse(readFileSync(path.join(resourcesDir, 'validation', 'suite.json'), 'utf8')) as { checks: { id: string; quick: boolean }[] };
const quickIds = suite.checks.filter((c) => c.quick).map((c) => c.id);

beforeAll(async () => {
  ensureBuilt();
  app = await AppService.start({ workerEntry: engineWorkerPath, resourcesDir, engineDir, projectDir: dir, host: 'web', concurrency: 1, log: () => undefined });
}, 300_000);
afterAll(async () => app?.close());

async function call<T>(channel: string, payload?: unknown): Promise<Result<T>> {
  return (await app.handle(channel, payload)) as Result<T>;
}

describe('verify.run in the application service', () => {
  it('runs the quick suite in a worker with progress per check, saves the report and logs it', async () => {
    const events: VerifyProgressEvent[] = [];
    const off = app.subscribe('verify-progress', (e) => events.push(e));
    const r = await call<VerificationRun>('verify.run', { quick: true });
    off();
    if (!r.ok) throw new Error(`${r.error.kind}: ${r.error.message}`);
    const run = r.value;
    expect(run.report.mode).toBe('quick');
    expect(run.report.status).toBe('PASS');
    expect(run.report.checks.map((c) => c.id)).toEqual(quickIds);
    // The report names the engine files the host gave, not a folder found on its own.
    expect(run.report.engine.directory).toBe(engineDir);
    expect(run.report.engine.pattern).toMatch(/installed build/);
    expect(run.html).toContain(run.report.engine.sha256);
    expect(run.html).toMatch(/Signature/);

    // Every check: one "running" event, then one with its final status, in order.
    const total = quickIds.length;
    expect(events).toHaveLength(2 * total);
    quickIds.forEach((id, i) => {
      expect(events[2 * i]).toMatchObject({ id, index: i + 1, total, status: 'running' });
      expect(events[2 * i + 1]).toMatchObject({ id, index: i + 1, total, status: run.report.checks[i].status });
    });

    // Saved in the project: validation/<runId>/report.json + report.html, and an audit line.
    expect(run.savedIn).toBe(path.join(dir, 'validation', run.runId));
    expect(JSON.parse(readFileSync(path.join(run.savedIn, 'report.json'), 'utf8'))).toEqual(run.report);
    expect(readFileSync(path.join(run.savedIn, 'report.html'), 'utf8')).toBe(run.html);
    const audit = await app.store.readAudit();
    const line = audit.find((a) => a.action === 'verification.run' && a.id === run.runId);
    expect(line?.detail).toMatch(/^verification run \(quick\): PASS/);

    const list = await call<VerificationRunSummary[]>('verify.list');
    expect(list.ok && list.value[0]).toMatchObject({ runId: run.runId, status: 'PASS', mode: 'quick', total, passed: run.report.summary.passed });
    const again = await call<VerificationRun>('verify.get', { runId: run.runId });
    expect(again.ok && again.value.html).toBe(run.html);
  }, 240_000);

  it('verify.cancel stops a running verification; nothing is saved and the cancel is logged', async () => {
    const before = await call<VerificationRunSummary[]>('verify.list');
    const started = new Promise<void>((resolve) => {
      const off = app.subscribe('verify-progress', (e) => {
        if (e.status === 'running') {
          off();
          resolve();
        }
      });
    });
    const running = call<VerificationRun>('verify.run', { quick: false });
    await started;
    // A second run while one runs is refused, not queued.
    const second = await call('verify.run', { quick: true });
    expect(second.ok === false && second.error.kind).toBe('usage');
    const c = await call<{ cancelled: boolean }>('verify.cancel');
    expect(c.ok && c.value.cancelled).toBe(true);
    const r = await running;
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error.kind).toBe('cancelled');
    const after = await call<VerificationRunSummary[]>('verify.list');
    expect(after.ok && before.ok && after.value.length).toBe(before.ok ? before.value.length : -1);
    expect((await app.store.readAudit()).some((a) => a.action === 'verification.cancel')).toBe(true);
    // Nothing is running any more.
    const c2 = await call<{ cancelled: boolean }>('verify.cancel');
    expect(c2.ok && c2.value.cancelled).toBe(false);
  }, 60_000);

  it('refuses a malformed request and an unknown run id', async () => {
    const bad = await call('verify.run', { quick: 'yes' });
    expect(bad.ok === false && bad.error.kind).toBe('usage');
    const missing = await call('verify.get', { runId: 'v-nothing' });
    expect(missing.ok).toBe(false);
  });
});

describe('verify.run with a damaged validation set', () => {
  it('reports FAIL, names the check, and still saves the report and logs FAIL', async () => {
    // A copy of resources/ where one closed-form reference concentration is 1 % off: the engine
    // is right, so the comparison must fail on exactly that check.
    const resCopy = mkdtempSync(path.join(tmpdir(), 'plateau-verify-res-'));
    cpSync(resourcesDir, resCopy, { recursive: true });
    const refFile = path.join(resCopy, 'validation', 'reference', 'closed-form', 'closed_form.json');
    const ref = JSON.parse(readFileSync(refFile, 'utf8')) as { cases: { concMgL: number[] }[] };
    ref.cases[0].concMgL[3] *= 1.01;
    writeFileSync(refFile, JSON.stringify(ref));
    const project = mkdtempSync(path.join(tmpdir(), 'plateau-verify-fail-'));
    const broken = await AppService.start({ workerEntry: engineWorkerPath, resourcesDir: resCopy, engineDir, projectDir: project, host: 'web', concurrency: 1, log: () => undefined });
    try {
      const r = (await broken.handle('verify.run', { quick: true })) as Result<VerificationRun>;
      if (!r.ok) throw new Error(`${r.error.kind}: ${r.error.message}`);
      expect(r.value.report.status).toBe('FAIL');
      expect(r.value.report.checks.filter((c) => c.status === 'fail').map((c) => c.id)).toEqual(['models.closed-form']);
      expect(r.value.html).toMatch(/FAIL/);
      const audit = await broken.store.readAudit();
      expect(audit.find((a) => a.action === 'verification.run')?.detail).toMatch(/^verification run \(quick\): FAIL/);
      const list = (await broken.handle('verify.list', undefined)) as Result<VerificationRunSummary[]>;
      expect(list.ok && list.value.map((x) => x.status)).toEqual(['FAIL']);
    } finally {
      await broken.close();
    }
  }, 240_000);
});
