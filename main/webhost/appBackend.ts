/**
 * The application services behind a host's bridge: started once with the paths the host gives,
 * exposed as a BridgeBackend (request checks of main/protocol, answers, events).
 */
import * as os from 'node:os';
import * as path from 'node:path';
import { EVENT_NAMES } from '../protocol/index.js';
import type { SpawnWorker } from '../services/workerSpawner.js';
import type { AppPaths } from './appPaths.js';
import { parseBridgeRequest, type BridgeBackend, type BridgeReply } from './backend.js';

/** The part of the application service a host uses (main/services/appService.ts). */
export interface AppServiceLike {
  handle(channel: unknown, payload: unknown): Promise<BridgeReply>;
  subscribe(event: (typeof EVENT_NAMES)[number], listener: (payload: never) => void): () => void;
  close(): Promise<void>;
}

export function backendFromService(service: AppServiceLike): BridgeBackend {
  return {
    parseRequest: parseBridgeRequest,
    handle: (channel, payload) => service.handle(channel, payload),
    subscribe(listener) {
      const offs = EVENT_NAMES.map((event) => service.subscribe(event, ((payload: unknown) => listener(event, payload)) as (payload: never) => void));
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
  void options;
  const notYet = { kind: 'usage' as const, message: 'the application services are not wired into this build yet', problems: [] };
  return {
    backend: { parseRequest: parseBridgeRequest, handle: async () => ({ ok: false, error: notYet }), subscribe: () => () => {} },
    stop: async () => {},
  };
}
