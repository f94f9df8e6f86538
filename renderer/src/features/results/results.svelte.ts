/** Results view state: the fits shown (the first is the one in detail), their records and datasets. */
import type { Dataset } from '../../../../engine/data/types.js';
import { request } from '../../lib/bridge/index.js';
import { messageOf } from '../../lib/app.svelte.js';
import type { FitValue } from '../../lib/types.js';

export type PlotId = 'gof' | 'residuals' | 'individual' | 'vpc' | 'covariates' | 'convergence';

export class ResultsState {
  selected = $state<string[]>([]);
  fits = $state.raw<Map<string, FitValue>>(new Map());
  datasets = $state.raw<Map<string, Dataset>>(new Map());
  loading = $state(false);
  error = $state<string | null>(null);
  plot = $state<PlotId>('gof');
  log = $state(false);
  page = $state(0);
  exportNote = $state<string | null>(null);

  current = $derived(this.selected.length ? (this.fits.get(this.selected[0]) ?? null) : null);
  currentDataset = $derived(this.current ? (this.datasets.get(this.current.datasetId) ?? null) : null);

  async select(ids: string[]): Promise<void> {
    this.selected = ids;
    this.loading = true;
    this.error = null;
    try {
      const fits = new Map(this.fits);
      for (const id of ids) if (!fits.has(id)) fits.set(id, await request('fits.get', { fitId: id }));
      this.fits = fits;
      const ds = new Map(this.datasets);
      for (const id of ids) {
        const dId = fits.get(id)?.datasetId;
        if (dId && !ds.has(dId)) ds.set(dId, await request('dataset.get', { datasetId: dId }));
      }
      this.datasets = ds;
    } catch (e) {
      this.error = messageOf(e);
    } finally {
      this.loading = false;
    }
  }

  toggle(id: string): void {
    const ids = this.selected.includes(id) ? this.selected.filter((x) => x !== id) : [...this.selected, id];
    void this.select(ids);
  }

  /** Download the fit's tables as .xlsx (the web page saves it; Electron may show a dialog). */
  async exportXlsx(): Promise<void> {
    const fit = this.current;
    if (!fit) return;
    try {
      const file = await request('fits.exportXlsx', { fitId: fit.fitId });
      const bytes = Uint8Array.from(atob(file.bytesBase64), (c) => c.charCodeAt(0));
      const url = URL.createObjectURL(new Blob([bytes], { type: 'application/vnd.openxmlformats-officedocument.spreadsheetml.sheet' }));
      const a = document.createElement('a');
      a.href = url;
      a.download = file.fileName;
      a.click();
      setTimeout(() => URL.revokeObjectURL(url), 10_000);
      this.exportNote = `Saved ${file.fileName} to your downloads.`;
    } catch (e) {
      this.error = messageOf(e);
    }
  }
}
