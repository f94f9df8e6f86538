/**
 * Dosing view state: the prior, the patient form, the target, the advice from the dose service,
 * and the what-if regimen whose curve the engine redraws in the renderer.
 */
import type { Dataset } from '../../../../engine/data/types.js';
import type { Forecast } from '../../../../engine/dosing/forecast.js';
import type { Regimen } from '../../../../engine/dosing/metrics.js';
import { checkEnteredForm, literatureForm } from './enteredModel.js';
import type { ModelForm } from '../models/modelForm.js';
import type { CatalogueEntry } from '../../lib/types.js';
import { request } from '../../lib/bridge/index.js';
import { RunningRequest } from '../../lib/bridge/cancellable.js';
import { messageOf } from '../../lib/app.svelte.js';
import { emptyForm, formFromPatientJson, formFromSubject, formToPatient, type PatientForm } from './patientForm.js';
import type { Advice, LiteratureModel, PriorChoice, TargetPreset, TargetSpec } from './types.js';
import { buildWhatIfContext, populationFrom, whatIfForecast, type WhatIfContext } from './whatIf.js';

/** Same seed, same advice: the seed is shown and can be changed. */
export const DEFAULT_SEED = 1;

export class DosingState {
  targets = $state<TargetPreset[]>([]);
  literature = $state<LiteratureModel[]>([]);
  prior = $state<PriorChoice>({ kind: 'none' });
  form = $state<PatientForm>(emptyForm());
  targetId = $state('');
  /** Edited goal bounds and MIC (strings as typed; empty = the preset's). */
  micMgL = $state('');
  goalMin = $state('');
  goalMax = $state('');
  seed = $state(DEFAULT_SEED);
  /** A literature model entered in a form, with its source and covariate ranges. */
  catalogue = $state<CatalogueEntry[]>([]);
  entered = $state<ModelForm | null>(null);
  loadingDose = $state(false);

  advice = $state<Advice | null>(null);
  busy = $state(false);
  error = $state<string | null>(null);
  problems = $state<string[]>([]);
  /** The request counter: a result that arrives after a newer request or a cancel is discarded. */
  private ticket = 0;
  /** The advice job running in a worker, stopped by Cancel or by a newer request. */
  private readonly running = new RunningRequest('advise', (requestId) => request('dosing.cancel', { requestId }));

  /** Datasets of the project, for the patient picker. */
  dataset = $state<Dataset | null>(null);
  datasetId = $state('');

  whatIf = $state<{ doseMg: number; intervalH: number; durationH: number }>({ doseMg: 1000, intervalH: 12, durationH: 1 });
  whatIfForecast = $state.raw<Forecast | null>(null);
  whatIfMs = $state<number | null>(null);
  whatIfPreparing = $state(false);
  whatIfError = $state<string | null>(null);
  private whatIfCtx: WhatIfContext | null = null;
  private whatIfKey = '';

  target = $derived<TargetSpec | null>(this.targets.find((t) => t.id === this.targetId)?.target ?? null);

  async load(): Promise<void> {
    try {
      const [targets, literature, catalogue] = await Promise.all([request('dosing.targets'), request('dosing.literatureModels'), request('models.catalogue')]);
      this.targets = targets;
      this.literature = literature;
      this.catalogue = catalogue;
      if (!this.targetId && targets.length) this.targetId = targets[0].id;
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  /** Start entering a literature model of this structure. */
  enterModel(structure: string): void {
    const entry = this.catalogue.find((c) => c.id === structure);
    if (entry) this.entered = literatureForm(entry);
  }

  async pickDataset(id: string): Promise<void> {
    this.datasetId = id;
    this.dataset = null;
    if (!id) return;
    try {
      this.dataset = await request('dataset.get', { datasetId: id });
    } catch (e) {
      this.error = messageOf(e);
    }
  }

  pickSubject(subjectId: string): void {
    const s = this.dataset?.subjects.find((x) => x.id === subjectId);
    if (s) this.form = formFromSubject(s);
  }

  loadPatientJson(p: Record<string, unknown>): void {
    this.form = formFromPatientJson(p);
  }

  /** The target as sent: the preset id, or the preset with the user's edits of the first goal's bounds. */
  targetToSend(): Record<string, unknown> | string | undefined {
    const t = this.target;
    if (!t) return undefined;
    if (!this.goalMin.trim() && !this.goalMax.trim()) return this.targetId;
    const copy: TargetSpec = JSON.parse(JSON.stringify(t));
    if (copy.goals[0]) {
      if (this.goalMin.trim()) copy.goals[0].min = Number(this.goalMin);
      if (this.goalMax.trim()) copy.goals[0].max = Number(this.goalMax);
    }
    copy.label = `${t.label} (edited)`;
    return copy as unknown as Record<string, unknown>;
  }

  priorToSend(): { fitId: string } | { literatureModelId: string } | { spec: Record<string, unknown> } | undefined {
    const p = this.prior;
    if (p.kind === 'fit') return { fitId: p.fitId };
    if (p.kind === 'literature') return { literatureModelId: p.id };
    if (p.kind === 'entered') {
      const spec = this.entered ? checkEnteredForm(this.entered).spec : undefined;
      return spec ? { spec } : undefined;
    }
    return undefined;
  }

  async advise(overrideBlocks = false): Promise<void> {
    this.error = null;
    const prior = this.priorToSend();
    const { patient, problems } = formToPatient(this.form);
    const all = [...problems];
    if (!prior) {
      if (this.prior.kind === 'entered' && this.entered) all.unshift(...checkEnteredForm(this.entered).problems.map((p) => `Prior model: ${p}`));
      else all.unshift('Prior model: choose a site fit or a literature model.');
    }
    const target = this.targetToSend();
    if (!target) all.push('Target: choose a target.');
    for (const [label, text] of [['MIC', this.micMgL], ['Goal minimum', this.goalMin], ['Goal maximum', this.goalMax]] as const)
      if (text.trim() && !Number.isFinite(Number(text))) all.push(`${label}: "${text}" is not a number.`);
    this.problems = all;
    if (all.length || !patient || !prior) return;
    const my = ++this.ticket;
    const requestId = this.running.start();
    this.busy = true;
    try {
      const advice = await request('dosing.advise', {
        requestId,
        prior,
        patient,
        ...(target !== undefined ? { target } : {}),
        options: { seed: this.seed, overrideBlocks, ...(this.loadingDose ? { loadingDose: true } : {}), ...(this.micMgL.trim() ? { micMgL: Number(this.micMgL) } : {}) },
      });
      if (my !== this.ticket) return;
      this.advice = advice;
      this.whatIfCtx = null;
      this.whatIfForecast = null;
      const top = advice.regimens[0];
      if (top) this.whatIf = { doseMg: top.doseMg, intervalH: top.intervalH, durationH: top.durationH };
    } catch (e) {
      if (my === this.ticket) this.error = messageOf(e);
    } finally {
      this.running.done(requestId);
      if (my === this.ticket) this.busy = false;
    }
  }

  /** Stop the advice being computed: its worker job ends and its answer, if any, is dropped. */
  cancel(): void {
    this.ticket++;
    this.running.stop();
    this.busy = false;
  }

  /**
   * Redraw the what-if curve. The first call rebuilds the posterior draws in the renderer
   * (about a second); later calls only forecast.
   */
  async redrawWhatIf(): Promise<void> {
    const advice = this.advice;
    if (!advice) return;
    this.whatIfError = null;
    const w = this.whatIf;
    if (!(w.doseMg > 0) || !(w.intervalH > 0) || !(w.durationH >= 0)) {
      this.whatIfError = 'Enter a dose above 0 mg, an interval above 0 h and an infusion duration of 0 h or more.';
      return;
    }
    if (w.durationH > w.intervalH) {
      this.whatIfError = 'The infusion duration is longer than the interval: shorten it or lengthen the interval.';
      return;
    }
    try {
      const key = JSON.stringify([this.prior, advice.seed, advice.patient.id, advice.regimenStart.timeH]);
      if (!this.whatIfCtx || key !== this.whatIfKey) {
        this.whatIfPreparing = true;
        const population = await this.populationForWhatIf();
        const { patient } = formToPatient(this.form);
        this.whatIfCtx = buildWhatIfContext(population, patient, advice.seed, advice.regimenStart.timeH);
        this.whatIfKey = key;
        this.whatIfPreparing = false;
      }
      const regimen: Regimen = { doseMg: w.doseMg, intervalH: w.intervalH, durationH: w.durationH, route: 'infusion' };
      const t0 = performance.now();
      this.whatIfForecast = whatIfForecast(this.whatIfCtx, regimen);
      this.whatIfMs = performance.now() - t0;
    } catch (e) {
      this.whatIfPreparing = false;
      this.whatIfError = `The what-if curve could not be drawn: ${messageOf(e)}`;
    }
  }

  private async populationForWhatIf() {
    const p = this.prior;
    if (p.kind === 'fit') return populationFrom({ fit: (await request('fits.get', { fitId: p.fitId })).record });
    if (p.kind === 'entered') {
      const spec = this.entered ? checkEnteredForm(this.entered).spec : undefined;
      if (!spec) throw new Error('the model entered has a problem: compute the advice again');
      return populationFrom({ spec });
    }
    const m = p.kind === 'literature' ? this.literature.find((x) => x.id === p.id) : undefined;
    if (!m) throw new Error('choose the prior model again');
    return populationFrom({ spec: m.model });
  }

  async saveSession(reviewer: string): Promise<string | null> {
    if (!this.advice) return null;
    try {
      const r = await request('dosing.saveSession', { advice: this.advice as unknown as Record<string, unknown>, ...(reviewer ? { reviewer } : {}) });
      return r.sessionId;
    } catch (e) {
      this.error = messageOf(e);
      return null;
    }
  }
}
