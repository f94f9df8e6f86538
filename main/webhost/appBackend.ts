/**
 * The application services behind a host's bridge: started once with the paths the host gives,
 * exposed as a BridgeBackend (request checks of main/protocol, answers, events).
 */
import * as os from 'node:os';
import * as path from 'node:path';
import { EVENT_NAMES } from '../protocol/index.js';
import { AppService } from '../services/appService.js';
import type { SpawnWorker } from '../services/workerSpawner.js';
import type { AppPaths } from './appPaths.js';
import { parseBridgeRequest, type BridgeBackend } from './backend.js';

export function backendFromService(service: Pick<AppService, 'handle' | 'subscribe'>): BridgeBackend {
  return {
    parseRequest: parseBridgeRequest,
    handle: (channel, payload) => service.handle(channel, payload),
    subscribe(listener) {
      const offs = EVENT_NAMES.map((event) => service.subscribe(event, (payload: unknown) => listener(event, payload)));
      return () => {
        for (const off of offs) off();
      };
    },
  };
}

/** The default project folder: Plateau in the user's home (Documents in the app). */
export function defaultProjectDir(): string {
  return path.join(os.homedir(), 'Plateau');
}

export interface AppBackendOptions {
  paths: AppPaths;
  projectDir: string;
  host: 'electron' | 'web';
  appVersion: string;
  spawn?: SpawnWorker;
  log?: (line: string) => void;
}

export interface RunningBackend {
  backend: BridgeBackend;
  stop(): Promise<void>;
}

export async function startAppBackend(options: AppBackendOptions): Promise<RunningBackend> {
  const service = await AppService.start({
    workerEntry: path.join(options.paths.mainDir, 'worker', 'engineWorker.js'),
    resourcesDir: options.paths.resourcesDir,
    engineDir: options.paths.engineDir,
    projectDir: options.projectDir,
    rendererDir: options.paths.rendererDir,
    host: options.host,
    appVersion: options.appVersion,
    ...(options.spawn ? { spawn: options.spawn } : {}),
    ...(options.log ? { log: options.log } : {}),
  });
  return { backend: backendFromService(service), stop: () => service.close() };
}
