/**
 * The web host as an application: the services, the bridge backend over them, the server, the
 * one URL line, the browser, and a clean stop on Ctrl-C / SIGTERM.
 */
import type { AppPaths } from './appPaths.js';
import type { BridgeBackend } from './backend.js';
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

/** Until the application services land, every request is refused with a clear reason. */
function servicesBackend(): { backend: BridgeBackend; stop: () => Promise<void> } {
  const notYet = { kind: 'usage' as const, message: 'the application services are not wired into this build yet', problems: [] };
  return {
    backend: { parseRequest: () => ({ ok: false, error: notYet }), handle: async () => ({ ok: false, error: notYet }), subscribe: () => () => {} },
    stop: async () => {},
  };
}

export async function runWebApp(options: WebAppOptions): Promise<WebHost> {
  const print = options.print ?? ((line: string) => void process.stdout.write(`${line}\n`));
  const services = servicesBackend();
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
