#!/usr/bin/env node
/** The `plateau` bin: wires the process to runCli. */
import { runCli } from './run.js';

const controller = new AbortController();
let interrupted = false;
process.on('SIGINT', () => {
  // First Ctrl-C asks the running command to stop cleanly; a second one exits at once.
  if (interrupted) process.exit(130);
  interrupted = true;
  process.stderr.write('\nplateau: stopping (press Ctrl-C again to exit at once)\n');
  controller.abort();
});

const code = await runCli(process.argv.slice(2), {
  stdout: (text) => void process.stdout.write(text),
  stderr: (text) => void process.stderr.write(text),
  cwd: process.cwd(),
}, { signal: controller.signal });
process.exitCode = code;
