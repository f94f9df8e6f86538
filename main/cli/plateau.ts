#!/usr/bin/env node
/**
 * The `plateau` bin (docs/architecture.md, "Command line"). It runs the command in a child
 * process and supervises it, so Ctrl-C works in every phase, even while the engine is inside a
 * long synchronous step: the first Ctrl-C asks the command to stop (its AbortSignal); if it has
 * not ended within STOP_GRACE_MS, or on a second Ctrl-C, the child is killed, the temp files of
 * its unfinished writes are removed and the exit status is 130. After Ctrl-C no output file is
 * written. A closed stdout (`plateau fit ... | head -1`) does not stop the command: its
 * output files are still written. PLATEAU_IN_PROCESS=1 runs the command in this process.
 */
import { fork } from 'node:child_process';
import { rmSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
// The supervisor only forks and waits: the command's modules are loaded by the process that
// runs it (runHere), so the supervisor starts its child without loading them first.

const STOP_GRACE_MS = 2000;
const CHILD_ENV = 'PLATEAU_CLI_CHILD';

/** Writes to a stream that the reader may have closed (EPIPE): later text is dropped, the command goes on. */
function safeWriter(stream: NodeJS.WriteStream): (text: string) => void {
  let closed = false;
  stream.on('error', (e: NodeJS.ErrnoException) => {
    if (e.code === 'EPIPE' || e.code === 'ERR_STREAM_DESTROYED') closed = true;
    else closed = true; // any other stream failure: stop writing to it, never crash
  });
  return (text) => {
    if (closed) return;
    try {
      stream.write(text);
    } catch {
      closed = true;
    }
  };
}

/** The supervisor is gone (killed): stop too, as a worker does. */
function onParentGone(): void {
  process.exit(130);
}

async function runHere(child: boolean): Promise<void> {
  const [{ refuseWritesAfter, setTempFileObserver }, { runCli }] = await Promise.all([import('../services/files.js'), import('./run.js')]);
  const controller = new AbortController();
  refuseWritesAfter(controller.signal);
  let interrupted = false;
  const stop = () => {
    if (interrupted) {
      if (!child) process.exit(130);
      return;
    }
    interrupted = true;
    if (!child) process.stderr.write('\nplateau: stopping (press Ctrl-C again to exit at once)\n');
    controller.abort();
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
  if (child) {
    process.on('message', (m) => {
      if ((m as { type?: string })?.type === 'abort') stop();
    });
    // Tell the supervisor about temp files, so it can remove them if it has to kill this process.
    setTempFileObserver((file, active) => process.send?.({ type: 'temp', file, active }));
    process.on('disconnect', onParentGone);
  }
  const stderr = safeWriter(process.stderr);
  const code = await runCli(process.argv.slice(2), { stdout: safeWriter(process.stdout), stderr, cwd: process.cwd() }, { signal: controller.signal });
  process.exitCode = interrupted ? 130 : code;
  if (child) {
    process.off('disconnect', onParentGone);
    process.disconnect?.();
  }
}

function supervise(): void {
  const temps = new Set<string>();
  const childProcess = fork(fileURLToPath(import.meta.url), process.argv.slice(2), {
    stdio: ['inherit', 'inherit', 'inherit', 'ipc'],
    env: { ...process.env, [CHILD_ENV]: '1' },
  });
  let stopping = false;
  let killTimer: NodeJS.Timeout | undefined;
  const killChild = (why: string) => {
    if (childProcess.exitCode !== null || childProcess.signalCode !== null) return;
    process.stderr.write(`plateau: ${why}\n`);
    childProcess.kill('SIGKILL');
  };
  const onSignal = () => {
    if (stopping) return killChild('stopped at once');
    stopping = true;
    process.stderr.write('\nplateau: stopping (press Ctrl-C again to exit at once)\n');
    // The command got the terminal's Ctrl-C too and may be ending already: a send that finds
    // its channel closed (EPIPE) has nothing left to abort, and must not crash the supervisor.
    if (childProcess.connected) childProcess.send({ type: 'abort' }, () => undefined);
    killTimer = setTimeout(() => killChild(`stopped (the command did not end within ${STOP_GRACE_MS / 1000} s of Ctrl-C)`), STOP_GRACE_MS);
  };
  process.on('SIGINT', onSignal);
  process.on('SIGTERM', onSignal);
  childProcess.on('message', (m: { type?: string; file?: string; active?: boolean }) => {
    if (m?.type !== 'temp' || typeof m.file !== 'string') return;
    if (m.active) temps.add(m.file);
    else temps.delete(m.file);
  });
  childProcess.on('exit', (code, signal) => {
    clearTimeout(killTimer);
    for (const t of temps) rmSync(t, { force: true });
    // A command child ended by a signal nobody here sent (a crash, the system's out-of-memory
    // killer) says nothing itself: say it here, as the engine worker's owner would.
    if (!stopping && signal) process.stderr.write(`plateau: internal error: the command process ended unexpectedly (signal ${signal}), not because of a problem in your files; unfinished output files were removed\n`);
    process.exitCode = stopping ? 130 : code ?? 1;
  });
}

if (process.env[CHILD_ENV] === '1') await runHere(true);
else if (process.env.PLATEAU_IN_PROCESS === '1') await runHere(false);
else supervise();
