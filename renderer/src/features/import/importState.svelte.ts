/** Import view state: the file, the preview the worker parsed, role changes, templates, adding. */
import type { MappingTemplate, Role } from '../../../../engine/import/roles.js';
import { request } from '../../lib/bridge/index.js';
import { RunningRequest } from '../../lib/bridge/cancellable.js';
import { messageOf } from '../../lib/app.svelte.js';
import type { ImportPreview, TemplateSummary } from '../../lib/types.js';
import { toBase64 } from './roles.js';

export interface ImportOptionsForm {
  dateOrder: 'auto' | 'dayFirst' | 'monthFirst';
  decimalComma: boolean;
  molarMass: string;
  lloq: string;
  defaultRoute: '' | 'bolus' | 'infusion' | 'oral';
}

export class ImportState {
  fileName = $state('');
  /** CSV or text files: the lines, to show a problem's row as written (spreadsheets: cells via the report). */
  textLines = $state.raw<string[] | null>(null);
  private bytes: Uint8Array | null = null;
  preview = $state.raw<ImportPreview | null>(null);
  busy = $state(false);
  error = $state<string | null>(null);
  options = $state<ImportOptionsForm>({ dateOrder: 'auto', decimalComma: false, molarMass: '', lloq: '', defaultRoute: '' });
  templates = $state<TemplateSummary[]>([]);
  templateId = $state('');
  selectedProblem = $state<number | null>(null);
  addedDatasetId = $state<string | null>(null);
  savedTemplate = $state<string | null>(null);
  /** Answers to a request the user cancelled (or that a newer one replaced) are dropped. */
  private ticket = 0;
  /** The parse job running in a worker, stopped by Cancel or by a newer request. */
  private readonly running = new RunningRequest('import', (requestId) => request('import.cancel', { requestId }));

  /** Stop reading the file: the worker's parse job ends and its answer, if any, is dropped. */
  cancel(): void {
    this.ticket++;
    this.running.stop();
    this.busy = false;
  }

  async loadTemplates(): Promise<void> {
    try {
      this.templates = await request('import.templates');
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  async open(file: File): Promise<void> {
    this.fileName = file.name;
    this.bytes = new Uint8Array(await file.arrayBuffer());
    this.textLines = /\.(csv|txt|tsv)$/i.test(file.name) ? new TextDecoder().decode(this.bytes).split(/\r?\n/) : null;
    await this.parse();
  }

  optionProblems(): string[] {
    const p: string[] = [];
    if (this.options.molarMass.trim() && !(Number(this.options.molarMass) > 0)) p.push(`Molar mass: "${this.options.molarMass}" is not a positive number of g/mol.`);
    if (this.options.lloq.trim() && !(Number(this.options.lloq) > 0)) p.push(`LLOQ: "${this.options.lloq}" is not a positive number of mg/L.`);
    return p;
  }

  async parse(): Promise<void> {
    if (!this.bytes) return;
    const problems = this.optionProblems();
    if (problems.length) {
      this.error = problems.join(' ');
      return;
    }
    const o = this.options;
    const my = ++this.ticket;
    const requestId = this.running.start();
    this.busy = true;
    this.error = null;
    this.addedDatasetId = null;
    try {
      const preview = await request('import.parse', {
        requestId,
        fileName: this.fileName,
        bytesBase64: toBase64(this.bytes),
        options: {
          ...(o.dateOrder === 'dayFirst' ? { dayFirst: true } : o.dateOrder === 'monthFirst' ? { monthFirst: true } : {}),
          ...(o.decimalComma ? { decimalComma: true } : {}),
          ...(o.molarMass.trim() ? { molarMassGPerMol: Number(o.molarMass) } : {}),
          ...(o.lloq.trim() ? { lloqMgL: Number(o.lloq) } : {}),
          ...(o.defaultRoute ? { defaultRoute: o.defaultRoute } : {}),
        },
        ...(this.templateId ? { templateId: this.templateId } : {}),
      });
      if (my !== this.ticket) return;
      this.preview = preview;
      this.selectedProblem = null;
    } catch (e) {
      if (my === this.ticket) this.error = messageOf(e);
    } finally {
      this.running.done(requestId);
      if (my === this.ticket) this.busy = false;
    }
  }

  /** Change one column's role and re-read the file with the new mapping. */
  async setRole(sheet: string, header: string, letter: string, role: Role): Promise<void> {
    const pv = this.preview;
    if (!pv) return;
    const mapping: MappingTemplate = JSON.parse(JSON.stringify(pv.mapping));
    const sm = mapping.sheets.find((s) => s.sheet === sheet);
    if (!sm) {
      this.error = `Sheet "${sheet}" is not part of the mapping; it was skipped as not holding doses, levels or patients.`;
      return;
    }
    const col = sm.columns.find((c) => c.header === header);
    if (col) {
      col.role = role;
      delete col.note;
    } else sm.columns.push({ role, header, column: letter });
    const my = ++this.ticket;
    const requestId = this.running.start();
    this.busy = true;
    try {
      const preview = await request('import.remap', { requestId, importId: pv.importId, mapping: mapping as unknown as Record<string, unknown> });
      if (my === this.ticket) this.preview = preview;
    } catch (e) {
      if (my === this.ticket) this.error = messageOf(e);
    } finally {
      this.running.done(requestId);
      if (my === this.ticket) this.busy = false;
    }
  }

  async saveTemplate(name: string): Promise<void> {
    if (!this.preview || !name.trim()) return;
    try {
      await request('import.saveTemplate', { importId: this.preview.importId, name: name.trim() });
      this.savedTemplate = name.trim();
      await this.loadTemplates();
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  async add(name: string): Promise<string | null> {
    if (!this.preview) return null;
    try {
      const r = await request('import.addToProject', { importId: this.preview.importId, name: name.trim() || this.fileName });
      this.addedDatasetId = r.datasetId;
      return r.datasetId;
    } catch (e) {
      this.error = messageOf(e);
      return null;
    }
  }
}
