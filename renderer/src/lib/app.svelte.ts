/**
 * The app frame's state: which view is shown, the app information (caution text and whether
 * it was acknowledged), the project summary, and the last error to show in the frame.
 */
import { request, subscribe } from './bridge/index.js';
import type { AppInfo, ProjectSummary } from './types.js';

export type ViewId = 'import' | 'models' | 'queue' | 'results' | 'dosing' | 'verify';

export const VIEWS: ReadonlyArray<{ id: ViewId; label: string; hint: string }> = [
  { id: 'import', label: 'Import', hint: 'Read a spreadsheet of doses and levels' },
  { id: 'models', label: 'Models', hint: 'Choose and set up a model' },
  { id: 'queue', label: 'Fit queue', hint: 'Fits waiting, running and done' },
  { id: 'results', label: 'Results', hint: 'Estimates, diagnostics, comparisons' },
  { id: 'dosing', label: 'Dosing', hint: 'Advice for one patient' },
];

export class AppState {
  view = $state<ViewId>('import');
  info = $state<AppInfo | null>(null);
  project = $state<ProjectSummary | null>(null);
  error = $state<string | null>(null);
  loading = $state(true);
  /** Selections shared across views (a fit opened from the queue shows in Results). */
  selectedFitIds = $state<string[]>([]);
  selectedDatasetId = $state<string | null>(null);

  acknowledged = $derived(this.info?.cautionAcknowledged === true);

  async start(): Promise<void> {
    this.loading = true;
    try {
      this.info = await request('app.info');
      await this.refreshProject();
      subscribe('queue', () => void this.refreshProject());
    } catch (e) {
      this.error = messageOf(e);
    } finally {
      this.loading = false;
    }
  }

  async refreshProject(): Promise<void> {
    try {
      this.project = await request('project.summary');
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  async acknowledge(): Promise<void> {
    try {
      await request('app.acknowledgeCaution');
      if (this.info) this.info = { ...this.info, cautionAcknowledged: true };
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  go(view: ViewId): void {
    this.view = view;
  }
}

/** A readable message from anything thrown. */
export function messageOf(e: unknown): string {
  if (e instanceof Error) return e.message;
  return String(e);
}
