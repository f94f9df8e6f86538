/**
 * State of the verification view: the run in progress (checks as they start and end), the
 * finished run's report, and the runs saved in the project. One run at a time (the service
 * refuses a second).
 */
import { bridge, request, subscribe } from '../../lib/bridge/index.js';
import { messageOf } from '../../lib/app.svelte.js';
import type { VerificationRun, VerificationRunSummary } from '../../../../main/protocol/bridge.js';
import { applyProgress, emptyProgress, type RunProgress } from './progress.js';

export class VerifyState {
  running = $state(false);
  mode = $state<'quick' | 'full'>('quick');
  progress = $state<RunProgress>(emptyProgress());
  run = $state<VerificationRun | null>(null);
  past = $state<VerificationRunSummary[]>([]);
  error = $state<string | null>(null);
  notice = $state<string | null>(null);
  cancelling = $state(false);

  private listening = false;

  /** Listen for progress (once for the page: a run goes on while another view is shown). */
  listen(): void {
    if (this.listening) return;
    this.listening = true;
    subscribe('verify-progress', (e) => {
      if (this.running) this.progress = applyProgress(this.progress, e);
    });
  }

  async loadPast(): Promise<void> {
    try {
      this.past = await request('verify.list');
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  async start(quick: boolean): Promise<void> {
    if (this.running) return;
    this.running = true;
    this.cancelling = false;
    this.mode = quick ? 'quick' : 'full';
    this.progress = emptyProgress();
    this.run = null;
    this.error = null;
    this.notice = null;
    try {
      this.run = await request('verify.run', { quick });
    } catch (e) {
      if ((e as { kind?: string }).kind === 'cancelled') this.notice = 'The verification was cancelled. No report was made; run it again to get one.';
      else this.error = messageOf(e);
    } finally {
      this.running = false;
      this.cancelling = false;
    }
    await this.loadPast();
  }

  async cancel(): Promise<void> {
    this.cancelling = true;
    try {
      await request('verify.cancel');
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  async open(runId: string): Promise<void> {
    this.error = null;
    this.notice = null;
    try {
      this.run = await request('verify.get', { runId });
      this.progress = emptyProgress();
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  /**
   * Print the report. In the desktop app the report's own HTML goes to the report.pdf channel
   * (printed in a hidden window) and the PDF to the save dialog; in the browser the page prints
   * its rendering of the report (print stylesheet) through the print dialog.
   */
  async print(): Promise<void> {
    const run = this.run;
    if (!run) return;
    const host = window as unknown as { plateau?: { saveFile?: (p: { fileName: string; bytesBase64: string }) => Promise<unknown> } };
    if (bridge().host === 'electron' && typeof host.plateau?.saveFile === 'function') {
      try {
        const pdf = await request('report.pdf', { html: run.html });
        const name = `plateau-verification-${run.report.startedAt.slice(0, 10)}-${run.report.status}.pdf`;
        await host.plateau.saveFile({ fileName: name, bytesBase64: pdf.bytesBase64 });
      } catch (e) {
        this.error = messageOf(e);
      }
      return;
    }
    requestAnimationFrame(() => requestAnimationFrame(() => window.print()));
  }
}

/** One for the page, so a run and its report survive a switch to another view and back. */
export const verifyState = new VerifyState();
