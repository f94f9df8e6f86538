/**
 * Benchmark of the installation verification: `plateau verify --quick` and the full suite, as a
 * user runs them (a child process of the compiled CLI, wall time), and in-process with the CPU
 * time beside it because the build machines are shared. Targets: quick < 30 s, full < 3 min on
 * a 2-core PC. Figures only; nothing here is asserted.
 */
import { spawnSync } from 'node:child_process';
import { loadavg } from 'node:os';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { runVerification } from '../../main/verify/runner.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

const cli = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../main/cli/plateau.js');

function timeCli(args: string[]): { seconds: number; code: number | null } {
  const t0 = performance.now();
  const r = spawnSync(process.execPath, [cli, 'verify', ...args], { encoding: 'utf8', timeout: 600_000 });
  return { seconds: (performance.now() - t0) / 1000, code: r.status };
}

async function timeInProcess(quick: boolean): Promise<{ seconds: number; cpuSeconds: number; checks: number; status: string }> {
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  const r = await runVerification({ quick });
  const cpu = process.cpuUsage(cpu0);
  return { seconds: (performance.now() - t0) / 1000, cpuSeconds: (cpu.user + cpu.system) / 1e6, checks: r.checks.length, status: r.status };
}

export const suite = {
  name: 'verify',
  async run(): Promise<Figure[]> {
    const load = `load average ${loadavg()[0].toFixed(1)} at start`;
    const quickCli = timeCli(['--quick']);
    const fullCli = timeCli([]);
    const quick = await timeInProcess(true);
    const full = await timeInProcess(false);
    return [
      { name: 'plateau verify --quick (CLI, wall)', value: quickCli.seconds, unit: 's', target: '< 30', note: `exit ${quickCli.code}; ${load}` },
      { name: 'plateau verify, full suite (CLI, wall)', value: fullCli.seconds, unit: 's', target: '< 180', note: `exit ${fullCli.code}` },
      { name: 'verify --quick in-process, wall', value: quick.seconds, unit: 's', note: `${quick.checks} checks, ${quick.status}` },
      { name: 'verify --quick in-process, CPU', value: quick.cpuSeconds, unit: 's', note: 'main process only; the import check parses in a child process' },
      { name: 'verify full in-process, wall', value: full.seconds, unit: 's', note: `${full.checks} checks, ${full.status}` },
      { name: 'verify full in-process, CPU', value: full.cpuSeconds, unit: 's' },
    ];
  },
};
