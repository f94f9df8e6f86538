#!/usr/bin/env node
/**
 * `npm start`: the desktop app in Electron when its runtime is installed; otherwise (or with
 * --web) the loopback web host, whose URL with its token is printed on one line and opened in the
 * system browser unless --no-open.
 */
import { spawn } from 'node:child_process';
import { existsSync } from 'node:fs';
import { createRequire } from 'node:module';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { appPathsFromRoot } from './webhost/appPaths.js';
import { runWebApp } from './webhost/webApp.js';

const USAGE = `usage: npm start -- [--web] [--no-open] [--port N] [--project DIR] [--renderer DIR]
  --web           start the web host even when the Electron runtime is installed
  --no-open       do not open the system browser (web host)
  --port N        listen on this loopback port (default: a free one)
  --project DIR   the project folder to open
  --renderer DIR  the built renderer to serve (default: dist/renderer)
`;

export interface StartOptions {
  web: boolean;
  open: boolean;
  port: number;
  projectDir?: string;
  rendererDir?: string;
}

export function parseStartArgs(argv: readonly string[]): StartOptions | { help: true } | { error: string } {
  const options: StartOptions = { web: false, open: true, port: 0 };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const value = (): string | undefined => {
      const v = argv[i + 1];
      if (v === undefined || v.startsWith('--')) return undefined;
      i++;
      return v;
    };
    if (a === '--web') options.web = true;
    else if (a === '--no-open') options.open = false;
    else if (a === '--help' || a === '-h') return { help: true };
    else if (a === '--port') {
      const v = value();
      const n = v === undefined ? NaN : Number(v);
      if (!Number.isInteger(n) || n < 0 || n > 65535) return { error: `--port needs a port number 0-65535, got ${JSON.stringify(v ?? '')}` };
      options.port = n;
    } else if (a === '--project' || a === '--renderer') {
      const v = value();
      if (v === undefined) return { error: `${a} needs a folder` };
      if (a === '--project') options.projectDir = path.resolve(v);
      else options.rendererDir = path.resolve(v);
    } else return { error: `unknown option ${JSON.stringify(a)}\n${USAGE}` };
  }
  return options;
}

/** The Electron executable when the runtime is installed (the npm package resolves to its path). */
export function findElectronRuntime(): string | undefined {
  try {
    const resolved: unknown = createRequire(import.meta.url)('electron');
    return typeof resolved === 'string' && existsSync(resolved) ? resolved : undefined;
  } catch {
    return undefined;
  }
}

async function main(): Promise<number> {
  const parsed = parseStartArgs(process.argv.slice(2));
  if ('help' in parsed) {
    process.stdout.write(USAGE);
    return 0;
  }
  if ('error' in parsed) {
    process.stderr.write(`plateau start: ${parsed.error}\n`);
    return 2;
  }
  // dist/main/start.js -> the app root two folders up; given to every part from here on.
  const appRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
  if (!parsed.web) {
    const electron = findElectronRuntime();
    if (electron) {
      const env = { ...process.env };
      delete env.ELECTRON_RUN_AS_NODE;
      const args = [appRoot];
      if (parsed.projectDir) args.push('--project', parsed.projectDir);
      const child = spawn(electron, args, { stdio: 'inherit', env });
      return await new Promise<number>((resolve) => {
        child.on('exit', (code) => resolve(code ?? 1));
        child.on('error', (error) => {
          process.stderr.write(`plateau start: could not start Electron (${error.message})\n`);
          resolve(1);
        });
      });
    }
    process.stdout.write('The Electron runtime is not installed here; starting the web host instead (open the URL below in a browser).\n');
  }
  const paths = appPathsFromRoot(appRoot, parsed.rendererDir ? { rendererDir: parsed.rendererDir } : {});
  await runWebApp({ paths, port: parsed.port, open: parsed.open, projectDir: parsed.projectDir });
  return 0;
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  main().then(
    (code) => {
      if (code !== 0) process.exitCode = code;
    },
    (error: unknown) => {
      process.stderr.write(`plateau start: ${error instanceof Error ? error.message : String(error)}\n`);
      if (process.env.PLATEAU_DEBUG && error instanceof Error) process.stderr.write(`${error.stack}\n`);
      process.exitCode = 1;
    },
  );
}
