/**
 * The project store: atomic saves under SIGKILL at random moments (seeded), corrupt and
 * newer-version files refused and left untouched, migration of an older schema, stale temp
 * files removed at open, append-only audit log.
 */
import { fork } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseProjectFile, ProjectStore, PROJECT_SCHEMA_VERSION } from '../../../main/services/projectStore.js';
import { ensureBuilt, repoRoot, resourcesDir } from './build.js';

beforeAll(() => ensureBuilt(), 300_000);
const tmp = () => mkdtempSync(path.join(tmpdir(), 'plateau-store-'));

describe('project store', () => {
  it('creates the demo project with its dataset, model and audit entries', async () => {
    const dir = tmp();
    const s = await ProjectStore.open(dir, { create: 'demo', resourcesDir });
    expect(s.project.schemaVersion).toBe(PROJECT_SCHEMA_VERSION);
    expect(s.project.datasets[0].hash).toMatch(/^sha256:[0-9a-f]{64}$/);
    const ds = await s.getDataset(s.project.datasets[0].id);
    expect(Object.getPrototypeOf(ds.subjects[0].covariates)).toBeNull();
    const audit = await s.readAudit();
    expect(audit.map((a) => a.action)).toEqual(['project.create', 'dataset.add', 'model.save']);
    expect(audit[1].dataHash).toBe(s.project.datasets[0].hash);
    // Reopening gives the same index.
    expect((await ProjectStore.open(dir)).project).toEqual(s.project);
  });

  it('refuses a corrupt project.json and a newer one, and leaves both untouched', async () => {
    for (const text of ['{"format":"plateau-project","schemaVersion":1,"name":"x",', `{"format":"plateau-project","schemaVersion":${PROJECT_SCHEMA_VERSION + 1},"name":"future"}`, '{"format":"plateau-project","schemaVersion":1,"name":5}']) {
      const dir = tmp();
      writeFileSync(path.join(dir, 'project.json'), text);
      await expect(ProjectStore.open(dir, { create: 'demo', resourcesDir })).rejects.toThrow(/left untouched|not valid JSON/);
      expect(readFileSync(path.join(dir, 'project.json'), 'utf8')).toBe(text);
    }
    await expect(ProjectStore.open(tmp())).rejects.toThrow(/no Plateau project/);
  });

  it('refuses a project another live process holds, and takes over a dead holder\'s lock', async () => {
    const dir = tmp();
    const s = await ProjectStore.open(dir, { create: 'empty' });
    await s.close();
    writeFileSync(path.join(dir, 'project.lock'), `${process.ppid}\n`); // a live process that is not us
    await expect(ProjectStore.open(dir)).rejects.toThrow(/open in another Plateau process/);
    writeFileSync(path.join(dir, 'project.lock'), '999999\n'); // gone
    const again = await ProjectStore.open(dir);
    expect(readFileSync(path.join(dir, 'project.lock'), 'utf8').trim()).toBe(String(process.pid));
    await again.close();
    expect(existsSync(path.join(dir, 'project.lock'))).toBe(false);
  });

  it('migrates schema 0 and keeps the original beside it', async () => {
    const dir = tmp();
    const old = JSON.stringify({ format: 'plateau-project', name: 'old', createdAt: '2026-01-01T00:00:00Z', datasets: [], models: [], fits: [] });
    writeFileSync(path.join(dir, 'project.json'), old);
    const s = await ProjectStore.open(dir);
    expect(s.project).toMatchObject({ schemaVersion: 1, name: 'old', templates: [], dosingSessions: [] });
    expect(readFileSync(path.join(dir, 'project.json.v0.bak'), 'utf8')).toBe(old);
    expect(parseProjectFile(readFileSync(path.join(dir, 'project.json'), 'utf8'), 'p').migratedFrom).toBeUndefined();
    expect(s.notes.join(' ')).toMatch(/migrated/);
  });

  it('removes temp files of dead writers at open, keeps those of live ones', async () => {
    const dir = tmp();
    await ProjectStore.open(dir, { create: 'empty' });
    const dead = path.join(dir, '.project.json.999999.abcd1234.tmp');
    const live = path.join(dir, `.project.json.${process.ppid}.abcd1234.tmp`);
    writeFileSync(dead, 'partial');
    writeFileSync(live, 'in progress');
    const s = await ProjectStore.open(dir);
    expect(existsSync(dead)).toBe(false);
    expect(existsSync(live)).toBe(true);
    expect(s.notes.join(' ')).toMatch(/temporary/);
  });

  it('leaves project.json old or new, never broken, across 240 writers killed at random moments', async () => {
    const script = path.join(repoRoot, 'tests/integration/services/storeWriter.mjs');
    const dist = path.join(repoRoot, 'dist');
    let seed = 12345;
    const next = () => ((seed = (seed * 1103515245 + 12345) & 0x7fffffff), seed / 0x7fffffff);
    const RUNS = 240;
    const LANES = 4; // four project folders, each with one writer at a time
    const runOne = (dir: string, delayMs: number) =>
      new Promise<void>((resolve, reject) => {
        const child = fork(script, [dir, dist], { stdio: ['ignore', 'ignore', 'pipe', 'ipc'] });
        let err = '';
        child.stderr!.on('data', (d) => (err += d));
        child.on('message', () => setTimeout(() => child.kill('SIGKILL'), delayMs));
        child.on('exit', (code, signal) => (signal === 'SIGKILL' ? resolve() : reject(new Error(`writer ended with ${code}: ${err}`))));
      });
    const delays = Array.from({ length: RUNS }, () => Math.floor(next() * 25));
    let saves = 0;
    let duringSave = 0;
    await Promise.all(
      Array.from({ length: LANES }, async (_, lane) => {
        const dir = tmp();
        await (await ProjectStore.open(dir, { create: 'empty' })).close();
        let lastRevision = 0;
        for (let i = lane; i < RUNS; i += LANES) {
          await runOne(dir, delays[i]);
          const { project } = parseProjectFile(readFileSync(path.join(dir, 'project.json'), 'utf8'), 'project.json'); // throws if broken
          expect(project.revision).toBeGreaterThanOrEqual(lastRevision);
          // A kill that landed during a save leaves the writer's temp file (cleaned at the next open) or a new revision.
          const leftTemp = readdirSync(dir).some((f) => f.endsWith('.tmp'));
          if (project.revision > lastRevision || leftTemp) duringSave++;
          lastRevision = project.revision;
        }
        saves += lastRevision;
        // The next open cleans what the killed writers left.
        await ProjectStore.open(dir);
        expect(readdirSync(dir).filter((f) => f.endsWith('.tmp'))).toEqual([]);
      }),
    );
    // Timing depends on the machine; the check only makes sure kills do land during saves.
    expect(duringSave).toBeGreaterThan(RUNS / 10);
    console.log(`store kill test: ${RUNS} writers killed at seeded random moments, ${saves} saves, ${duringSave} kills during a save, project.json valid after every kill`);
  }, 300_000);
});
