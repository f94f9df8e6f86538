/** The workerSpawner interface on Electron's utilityProcess (faked at its boundary). */
import { describe, expect, it, vi } from 'vitest';

vi.mock('electron', () => import('./fakeElectron.js'));
const fake = await import('./fakeElectron.js');
const { spawnUtilityWorker } = await import('../../../main/electron/utilityWorker.js');

describe('utilityProcess worker spawner', () => {
  it('forks the worker module with its flags and reports messages and the exit once', () => {
    const handle = spawnUtilityWorker({ modulePath: '/app/dist/main/worker/engineWorker.js', execArgv: ['--max-old-space-size=2048'] });
    const fork = fake.utilityProcess.forks.at(-1)!;
    expect(fork.modulePath).toBe('/app/dist/main/worker/engineWorker.js');
    expect(fork.options).toMatchObject({ execArgv: ['--max-old-space-size=2048'], stdio: ['ignore', 'ignore', 'pipe'] });
    const messages: unknown[] = [];
    const exits: [number | null, string | null][] = [];
    handle.onMessage((m) => messages.push(m));
    handle.onExit((code, signal) => exits.push([code, signal]));
    const emitter = fake.utilityProcess.children.at(-1)!;
    emitter.emit('message', { type: 'ready' });
    emitter.emit('error', 'FatalError', 'worker.js:1', 'report');
    emitter.emit('exit', 9);
    expect(messages).toEqual([{ type: 'ready' }]);
    expect(exits).toEqual([[9, null]]);
    expect(handle.stderrTail()).toContain('FatalError at worker.js:1');
  });
});
