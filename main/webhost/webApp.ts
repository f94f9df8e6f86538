/**
 * The web host as an application: the services, the bridge backend over them, the server, the
 * one URL line, the browser, and a clean stop on Ctrl-C / SIGTERM.
 */
import type { AppPaths } from './appPaths.js';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { defaultProjectDir, startAppBackend } from './appBackend.js';
import { openInBrowser } from './openBrowser.js';
import { startWebHost, type WebHost } from './server.js';

export interface WebAppOptions {
  paths: AppPaths;
  port: number;
  open: boolean;
  projectDir?: string;
  /** Where the URL line and notices go (stdout by default). */
  print?: (line: string) => void;
}

function appVersion(appRoot: string): string {
  try {
    return String((JSON.parse(readFileSync(path.join(appRoot, 'package.json'), 'utf8')) as { version?: unknown }).version ?? 'unknown');
  } catch {
    return 'unknown';
  }
}

export async function runWebApp(options: WebAppOptions): Promise<WebHost> {
  const print = options.print ?? ((line: string) => void process.stdout.write(`${line}\n`));
  const services = await startAppBackend({
    paths: options.paths,
    projectDir: options.projectDir ?? defaultProjectDir(),
    host: 'web',
    appVersion: appVersion(options.paths.appRoot),
  });
  const host = await startWebHost({ rendererDir: options.paths.rendererDir, backend: services.backend, port: options.port });
  print(`Plateau is running at ${host.url}`);
  if (options.open) openInBrowser(host.url, (reason) => print(`Could not open the browser (${reason}); open the URL above yourself.`));
  let stopping = false;
  const stop = () => {
    if (stopping) process.exit(130);
    stopping = true;
    void host.close().then(services.stop).then(() => process.exit(0));
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
  return host;
}
