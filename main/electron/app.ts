/**
 * The Electron app, wired from its parts: single instance, privileged app:// scheme, hardened
 * session and web contents, the services, the IPC gatekeeper, the menu and the one window.
 * Thin: every answer comes from the application services; the host adds only dialogs, PDF and
 * the window.
 */
import * as path from 'node:path';
import { app, BrowserWindow, protocol, session } from 'electron';
import { CHANNELS } from '../protocol/index.js';
import { startAppBackend, type RunningBackend } from '../webhost/appBackend.js';
import { appPathsFromRoot } from '../webhost/appPaths.js';
import { APP_SCHEME_PRIVILEGES, serveAppProtocol } from './appProtocol.js';
import { dialogHandlers } from './dialogs.js';
import { EVENT_CHANNEL, forwardEvents, registerIpc, type HostHandler } from './ipc.js';
import { appMenuTemplate, setAppMenu } from './menu.js';
import { printReportToPdf } from './pdf.js';
import { hardenSession, hardenWebContents, type Log } from './security.js';
import { spawnUtilityWorker } from './utilityWorker.js';
import { createMainWindow } from './window.js';

export interface BootOptions {
  argv: readonly string[];
  log?: Log;
}

export interface RunningApp {
  /** Resolves once the window exists (or the app quit as a second instance). */
  ready: Promise<void>;
  window(): BrowserWindow | undefined;
}

function argValue(argv: readonly string[], name: string): string | undefined {
  const i = argv.indexOf(name);
  return i >= 0 && i + 1 < argv.length ? argv[i + 1] : undefined;
}

export function bootstrap(options: BootOptions): RunningApp {
  const log: Log = options.log ?? ((line) => void process.stderr.write(`plateau: ${line}\n`));
  let window: BrowserWindow | undefined;
  if (!app.requestSingleInstanceLock()) {
    // Another Plateau is running: it comes to the front (second-instance below) and we leave.
    app.quit();
    return { ready: Promise.resolve(), window: () => undefined };
  }
  // Before ready, as Electron requires: app:// is a standard, secure scheme; every renderer sandboxed.
  protocol.registerSchemesAsPrivileged(APP_SCHEME_PRIVILEGES);
  app.enableSandbox();
  app.on('web-contents-created', (_event, contents) => hardenWebContents(contents, log));
  app.on('second-instance', () => {
    if (!window) return;
    if (window.isMinimized()) window.restore();
    window.focus();
  });
  app.on('window-all-closed', () => app.quit());

  let services: RunningBackend | undefined;
  app.on('will-quit', (event) => {
    if (!services) return;
    // Stop the workers and save the queue before leaving.
    event.preventDefault();
    const stopping = services;
    services = undefined;
    void stopping.stop().finally(() => app.quit());
  });

  const ready = app.whenReady().then(async () => {
    const paths = appPathsFromRoot(app.getAppPath());
    hardenSession(session.defaultSession, log);
    serveAppProtocol(session.defaultSession, paths.rendererDir);
    services = await startAppBackend({
      paths,
      projectDir: path.resolve(argValue(options.argv, '--project') ?? path.join(app.getPath('documents'), 'Plateau')),
      host: 'electron',
      appVersion: app.getVersion(),
      spawn: spawnUtilityWorker,
      log,
    });
    const contents = () => window?.webContents;
    const hostHandlers = new Map<string, HostHandler>(dialogHandlers(() => window));
    hostHandlers.set('report.pdf', (payload) => printReportToPdf(payload, log));
    registerIpc({ channels: CHANNELS, backend: services.backend, hostHandlers, windowContents: contents, log });
    forwardEvents(services.backend, contents);
    const devTools = !app.isPackaged;
    setAppMenu(
      appMenuTemplate({
        isMac: process.platform === 'darwin',
        devTools,
        send: (command) => contents()?.send(EVENT_CHANNEL, { event: 'menu', payload: { command } }),
      }),
    );
    window = createMainWindow(path.join(paths.mainDir, 'electron', 'preload.cjs'), devTools);
    window.on('closed', () => {
      window = undefined;
    });
  });
  ready.catch((error: unknown) => {
    log(`could not start: ${error instanceof Error ? error.message : String(error)}`);
    app.exit(1);
  });
  return { ready, window: () => window };
}
