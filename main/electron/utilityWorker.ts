/**
 * The worker spawner (main/services/workerSpawner.ts) on Electron's utilityProcess: the app's
 * estimation and parsing workers run as utility processes, the same worker modules the CLI and
 * the web host fork with child_process.
 */
import { utilityProcess } from 'electron';
import type { SpawnWorker } from '../services/workerSpawner.js';

export const spawnUtilityWorker: SpawnWorker = (entry) => {
  const child = utilityProcess.fork(entry.modulePath, [], {
    execArgv: entry.execArgv ?? [],
    stdio: ['ignore', 'ignore', 'pipe'],
    serviceName: 'Plateau worker',
  });
  let tail = '';
  child.stderr?.setEncoding('utf8');
  child.stderr?.on('data', (chunk: string) => {
    tail = (tail + chunk).slice(-8192);
  });
  let exited = false;
  const exitListeners: ((code: number | null, signal: string | null) => void)[] = [];
  child.once('exit', (code: number) => {
    exited = true;
    // utilityProcess reports no signal; a kill shows as a non-zero code.
    for (const l of exitListeners) l(code, null);
  });
  child.on('error', (type: string, location: string) => {
    tail = `${tail}\n${type} at ${location}`.slice(-8192);
  });
  return {
    postMessage(message) {
      if (!exited) child.postMessage(message);
    },
    onMessage(listener) {
      child.on('message', listener);
    },
    onExit(listener) {
      exitListeners.push(listener);
    },
    kill() {
      if (!exited) child.kill();
    },
    stderrTail: () => tail,
  };
};
