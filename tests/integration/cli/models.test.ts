import { execFileSync, spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { listStructuralModels } from '../../../engine/models/catalogue.js';
import { runCli } from '../../../main/cli/run.js';
import type { CliIo } from '../../../main/cli/types.js';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');

function captureIo(): CliIo & { out: string; err: string } {
  const io = { out: '', err: '', cwd: root, stdout: (t: string) => void (io.out += t), stderr: (t: string) => void (io.err += t) };
  return io;
}

describe('plateau models', () => {
  it('lists every catalogue model (text and JSON)', async () => {
    const io = captureIo();
    expect(await runCli(['models'], io)).toBe(0);
    for (const m of listStructuralModels()) expect(io.out).toContain(m.id);
    const j = captureIo();
    expect(await runCli(['models', '--json'], j)).toBe(0);
    const json = JSON.parse(j.out);
    expect(json.map((m: { id: string }) => m.id)).toEqual(listStructuralModels().map((m) => m.id));
    const one = json.find((m: { id: string }) => m.id === '1cmt');
    expect(one.parameterOrder.slice(0, 2)).toEqual(['CL', 'V']);
    expect(one.parameters.find((p: { name: string }) => p.name === 'F').defaultWhenAbsent).toBe(1);
  });

  it('help lists models and simulate', async () => {
    const io = captureIo();
    expect(await runCli(['help'], io)).toBe(0);
    expect(io.out).toMatch(/models\s+List the structural PK models/);
    expect(io.out).toMatch(/simulate\s+Predict concentrations/);
  });

  it('the built bin runs: node dist/main/cli/plateau.js models', () => {
    const bin = path.join(root, 'dist/main/cli/plateau.js');
    // `npm test` builds first; when run alone, build here so the check still means something.
    if (!existsSync(bin) || !existsSync(path.join(root, 'dist/main/cli/commands/models.js'))) {
      try {
        execFileSync(process.execPath, [path.join(root, 'node_modules/typescript/bin/tsc'), '-p', 'tsconfig.json'], { cwd: root, stdio: 'pipe' });
      } catch {
        // Type errors elsewhere still emit JavaScript; the existence check below decides.
      }
    }
    expect(existsSync(bin)).toBe(true);
    const r = spawnSync(process.execPath, [bin, 'models', '--json'], { cwd: root, encoding: 'utf8', env: { ...process.env, PLATEAU_DEBUG: '' } });
    expect(r.status).toBe(0);
    expect(JSON.parse(r.stdout).map((m: { id: string }) => m.id)).toContain('2cmt');
    const bad = spawnSync(process.execPath, [bin, 'nonsense'], { cwd: root, encoding: 'utf8' });
    expect(bad.status).toBe(2);
    expect(bad.stderr).toContain('unknown command "nonsense"');
  });
});
