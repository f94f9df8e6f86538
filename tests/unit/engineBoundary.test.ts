/**
 * engine/ is pure numerics that also runs in the renderer and the worker: it may import only
 * other engine files and an allow-list of pure packages; no Node built-ins, no DOM, no Electron,
 * no globals of a host (process, window, document), no require().
 */
import { spawnSync } from 'node:child_process';
import { readdirSync, readFileSync, statSync } from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');
const engineDir = path.join(root, 'engine');

/** Packages engine code may import (pure JavaScript, no host APIs). */
export const ALLOWED_PACKAGES = new Set(['seedrandom', 'xlsx']);

function listTs(dir: string): string[] {
  const out: string[] = [];
  for (const name of readdirSync(dir)) {
    const full = path.join(dir, name);
    if (statSync(full).isDirectory()) out.push(...listTs(full));
    else if (name.endsWith('.ts') && !name.endsWith('.d.ts')) out.push(full);
  }
  return out;
}

/** Remove comments and string/template literal contents, keeping line breaks (so line numbers stay right). */
export function stripCommentsAndStrings(src: string): string {
  let out = '';
  let i = 0;
  const n = src.length;
  while (i < n) {
    const c = src[i];
    const d = src[i + 1];
    if (c === '/' && d === '/') {
      while (i < n && src[i] !== '\n') i++;
    } else if (c === '/' && d === '*') {
      i += 2;
      while (i < n && !(src[i] === '*' && src[i + 1] === '/')) {
        if (src[i] === '\n') out += '\n';
        i++;
      }
      i += 2;
    } else if (c === '"' || c === "'" || c === '`') {
      const q = c;
      out += q;
      i++;
      while (i < n && src[i] !== q) {
        if (src[i] === '\\') i++;
        else if (src[i] === '\n') out += '\n';
        i++;
      }
      out += q;
      i++;
    } else {
      out += c;
      i++;
    }
  }
  return out;
}

export interface BoundaryViolation {
  file: string;
  line: number;
  what: string;
}

const IMPORT_RE = /(?:^|[\s;])(?:import|export)\s+(?:type\s+)?(?:[\w*{}\s,$]+\s+from\s+)?['"]([^'"]+)['"]|import\s*\(\s*['"]([^'"]+)['"]\s*\)/g;
const FORBIDDEN_GLOBALS = ['process', 'window', 'document', 'globalThis.process', 'navigator', 'localStorage', 'Buffer', '__dirname', '__filename'];

export function checkSource(file: string, src: string): BoundaryViolation[] {
  const problems: BoundaryViolation[] = [];
  const lineOf = (offset: number) => src.slice(0, offset).split('\n').length;
  for (const m of src.matchAll(IMPORT_RE)) {
    const spec = m[1] ?? m[2];
    const line = lineOf((m.index ?? 0) + (m[0].length - m[0].trimStart().length));
    if (spec.startsWith('.')) {
      const target = path.resolve(path.dirname(file), spec);
      // Plain data shipped in resources/ (JSON tables) is host-free too.
      const resourceData = target.startsWith(path.join(root, 'resources') + path.sep) && target.endsWith('.json');
      if (!target.startsWith(engineDir + path.sep) && !resourceData) problems.push({ file, line, what: `imports ${spec}, outside engine/` });
      continue;
    }
    if (spec.startsWith('node:') || spec === 'fs' || spec === 'path' || spec.startsWith('electron')) {
      problems.push({ file, line, what: `imports ${spec} (a Node or Electron module)` });
      continue;
    }
    const pkg = spec.startsWith('@') ? spec.split('/').slice(0, 2).join('/') : spec.split('/')[0];
    if (!ALLOWED_PACKAGES.has(pkg)) problems.push({ file, line, what: `imports package ${spec} (allowed: ${[...ALLOWED_PACKAGES].join(', ')})` });
  }
  const code = stripCommentsAndStrings(src);
  code.split('\n').forEach((text, k) => {
    for (const g of FORBIDDEN_GLOBALS) {
      // A bare identifier, not a property (x.process, { process: 1 }) or part of a longer name (processRow).
      const re = new RegExp(`(^|[^\\w$.])${g.replace('.', '\\.')}(?![\\w$]|\\s*:(?!:))`);
      if (re.test(text)) problems.push({ file, line: k + 1, what: `uses ${g} (a host global; engine code must not touch it)` });
    }
    if (/(^|[^\w$.])require\s*\(/.test(text)) problems.push({ file, line: k + 1, what: 'calls require() (engine is ESM and host-free)' });
    if (/(^|[^\w$])Math\.random\s*\(/.test(text)) problems.push({ file, line: k + 1, what: 'calls Math.random (use an engine/rng stream)' });
  });
  return problems;
}

describe('engine boundary', () => {
  it('engine/**/*.ts imports nothing from Node, the DOM or Electron, and uses no host globals', () => {
    const files = listTs(engineDir);
    expect(files.length).toBeGreaterThan(0);
    const violations = files.flatMap((f) => checkSource(f, readFileSync(f, 'utf8')));
    const report = violations.map((v) => `${path.relative(root, v.file)}:${v.line}: ${v.what}`).join('\n');
    expect(report).toBe('');
  });

  it('the checker catches what it should and ignores comments and strings', () => {
    const f = path.join(engineDir, 'x', 'probe.ts');
    const bad = [
      "import { readFileSync } from 'node:fs';",
      "import * as path from 'path';",
      "import { app } from 'electron';",
      "import lodash from 'lodash';",
      "import { x } from '../../main/cli/run.js';",
      'const env = process.env.X;',
      'window.alert(1);',
      'const d = document.body;',
      "const m = require('fs');",
      'const r = Math.random();',
      "const late = await import('node:os');",
    ].join('\n');
    const found = checkSource(f, bad);
    expect(found.map((v) => v.line).sort((a, b) => a - b)).toEqual([1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]);
    const fine = [
      "import seedrandom from 'seedrandom';",
      "import { read } from 'xlsx';",
      "import type { Dataset } from '../data/types.js';",
      "import defaults from '../../resources/import/importDefaults.json' with { type: 'json' };",
      '// process the rows; window of 3; document the choice; require( nothing',
      "const msg = 'the process window document';",
      'const processRow = 1; const obj = { process: 2 }; obj.process; const windowH = 3;',
    ].join('\n');
    expect(checkSource(path.join(engineDir, 'data', 'probe.ts'), fine)).toEqual([]);
  });
  it('engine/ type-checks with no host types at all (tsconfig.engine.json: lib ES2023, types [])', () => {
    const tsc = path.join(root, 'node_modules', 'typescript', 'bin', 'tsc');
    const r = spawnSync(process.execPath, [tsc, '-p', path.join(root, 'tsconfig.engine.json'), '--noEmit'], { encoding: 'utf8', timeout: 120_000 });
    expect(r.stdout + r.stderr).toBe('');
    expect(r.status).toBe(0);
  }, 120_000);
});
