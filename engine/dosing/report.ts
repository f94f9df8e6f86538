/**
 * Plain-text rendering of dose advice for the terminal. Plain words for the ward first (status,
 * exposure now, the current regimen against the target, the advised regimens with clock times,
 * the checks that bear on this advice, the doses and levels as read); the statistics after, in
 * a details section where each figure has a one-line explanation. The caution is printed once,
 * at the top (advice.json carries it too). Text from files goes through printable().
 */
import { printable } from '../text/printable.js';
import type { Advice } from './advise.js';
import { formatRegimen, type RegimenResult } from './regimens.js';
import type { Band } from './summary.js';
import { describeCondition, describeToxic, METRIC_LABELS, type MetricId } from './targets.js';

const f = (x: number | null | undefined): string => {
  if (x === null || x === undefined || !Number.isFinite(x)) return '-';
  const a = Math.abs(x);
  return a >= 100 ? x.toFixed(0) : a >= 10 ? x.toFixed(1) : a >= 1 ? x.toFixed(2) : x.toPrecision(2);
};
const band = (b: Band | undefined) => (b ? `${f(b.median)} [${f(b.q10)}-${f(b.q90)}]` : '-');
const pct = (p: number | null | undefined) => (p === null || p === undefined ? '-' : Number.isFinite(p) ? `${Math.round(100 * p)} %` : '-');
const pad = (s: string, n: number) => (s.length >= n ? s : s + ' '.repeat(n - s.length));
/** Text from a file, safe for a terminal. */
const t = (x: unknown) => printable(String(x));

function wrap(text: string, width = 96, indent = ''): string {
  const lead = /^\s*/.exec(text)?.[0] ?? '';
  const words = text.trim().split(/\s+/);
  const lines: string[] = [];
  let line = lead;
  for (const w of words) {
    if (line.trim() && line.length + 1 + w.length > width) {
      lines.push(line);
      line = indent + w;
    } else line = line.trim() ? `${line} ${w}` : line + w;
  }
  if (line) lines.push(line);
  return lines.join('\n');
}

/** "2026-11-25 08:00 (48 h)" with clock times, else "48 h". */
function when(h: number, clock: string | undefined): string {
  return clock ? `${clock} (${f(h)} h)` : `${f(h)} h`;
}

function clockOf(a: Advice, h: number): string | undefined {
  // The advice's clock origin is the first dose's clock time: the same conversion as the engine's.
  const origin = a.patient.clockOrigin;
  if (!origin) return undefined;
  const m = /^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2})/.exec(origin);
  if (!m) return undefined;
  const d = new Date(Date.UTC(+m[1], +m[2] - 1, +m[3], +m[4], +m[5]) + Math.round(h * 60) * 60000);
  const p = (x: number) => String(x).padStart(2, '0');
  return `${d.getUTCFullYear()}-${p(d.getUTCMonth() + 1)}-${p(d.getUTCDate())} ${p(d.getUTCHours())}:${p(d.getUTCMinutes())}`;
}

function regimenLine(r: RegimenResult, metricIds: MetricId[]): string {
  return `${pct(r.pTarget)} reach the target, ${pct(r.pToxic)} toxic exposure; ${metricIds
    .filter((id) => r.metrics[id])
    .map((id) => `${METRIC_LABELS[id].label.split(' (')[0]}${id === 'peakAt' ? ' (timed)' : ''} ${band(r.metrics[id])} ${METRIC_LABELS[id].unit}`)
    .join(', ')}`;
}

export function formatAdvice(a: Advice, maxRegimens = 10): string {
  const out: string[] = [];
  out.push(wrap(a.caution));
  out.push('');
  const status = a.status === 'advice' ? 'advice' : a.status === 'blocked' ? 'BLOCKED: NO DOSE ADVICE (see the blocking checks below)' : 'BLOCKED (regimens shown on request: do not use without resolving the blocking checks)';
  out.push(`Plateau dose advice for patient ${t(a.patient.id)}: ${status}`);
  const blocks = a.warnings.filter((w) => w.severity === 'block');
  for (const w of blocks) out.push(wrap(`  BLOCK ${t(w.message)}`, 96, '        '));
  const toxicNow = a.warnings.find((w) => w.code === 'toxic-now');
  if (toxicNow) out.push(wrap(`  NOW: ${t(toxicNow.message)}`, 96, '        '));
  const tg = a.target;
  const metricIds = (['auc24', 'trough', 'peak', 'peakAt', 'ftAbove'] as MetricId[]).filter((id) => a.current?.metrics[id] ?? a.regimens[0]?.metrics[id]);
  if (tg.goals.length) {
    out.push(`  target: ${t(tg.label)}: ${tg.goals.map((c) => describeCondition(tg, c)).join(' and ')}${tg.toxic.length ? `; toxic: ${tg.toxic.map((c) => describeToxic(tg, c)).join(' or ')}` : ''}`);
  }
  if (a.now) out.push(`  exposure now (${when(a.now.fromH, clockOf(a, a.now.fromH))} to ${when(a.now.toH, clockOf(a, a.now.toH))}): AUC24 ${band(a.now.auc24)} mg.h/L, level at the next dose ${band(a.now.levelAtNextDose)} mg/L, highest ${band(a.now.highest)} mg/L${a.now.pToxic !== null ? `; P(toxic now) ${pct(a.now.pToxic)}` : ''}`);
  if (a.current) out.push(wrap(`  current regimen ${formatRegimen(a.current)}, continued from ${when(a.patient.nextDoseH, a.patient.nextDoseClock)}: ${regimenLine(a.current, metricIds)} (median [80 % interval], steady state; P(toxic) includes the first ${3} intervals)`, 96, '    '));
  out.push('');

  if (a.regimens.length) {
    const start = when(a.regimenStart.timeH, a.regimenStart.clock);
    out.push(`${a.regimens.length === 1 && a.candidatesEvaluated === 1 ? 'Evaluated regimen' : `Advised regimens, best first (${Math.min(maxRegimens, a.regimens.length)} of ${a.candidatesEvaluated})`}, starting ${start}${a.regimenStart.delayed ? ' after holding the next dose' : a.patient.nextDoseAssumed ? ' (assumed next dose time)' : ''}:`);
    out.push('  steady state, median [80 % interval]; P(toxic) at steady state or in the first intervals');
    const width = Math.max(36, ...a.regimens.slice(0, maxRegimens).map((r) => formatRegimen(r).length + 2));
    const ids = metricIds.filter((id) => a.regimens[0].metrics[id]);
    out.push(`  ${pad('#', 4)}${pad('regimen', width)}${pad('P(target)', 11)}${pad('P(toxic)', 10)}${ids.map((id) => pad(`${METRIC_LABELS[id].label.split(' (')[0]}${id === 'peakAt' ? '@' : ''} ${METRIC_LABELS[id].unit}`, 24)).join('')}`);
    a.regimens.slice(0, maxRegimens).forEach((r, i) => {
      out.push(`  ${pad(String(i + 1), 4)}${pad(formatRegimen(r), width)}${pad(pct(r.pTarget), 11)}${pad(pct(r.pToxic), 10)}${ids.map((id) => pad(band(r.metrics[id]), 24)).join('')}`);
    });
    out.push('');
    for (const r of a.regimens) if (r.explanation) out.push(wrap(`  ${r.explanation}`, 96, '     '));
    out.push('');
  }
  const fc = a.forecast;
  if (fc && fc.intervals.length) {
    out.push(`Forecast of ${a.regimens[0] ? formatRegimen(a.regimens[0]) : 'the regimen'} from ${when(a.regimenStart.timeH, a.regimenStart.clock)}, median [80 %] (95 % bands in advice.json):`);
    for (const iv of fc.intervals)
      out.push(`  interval ${iv.index} (${when(iv.startH, clockOf(a, iv.startH))} to ${when(iv.endH, clockOf(a, iv.endH))}, ${iv.doseMg} mg): peak ${band(iv.peak)} mg/L, trough ${band(iv.trough)} mg/L, AUC24 ${band(iv.auc24)} mg.h/L${iv.pToxic !== null ? `, P(toxic) ${pct(iv.pToxic)}` : ''}`);
    if (fc.timeBelow) {
      const tb = fc.timeBelow;
      out.push(`  after the last given dose (no further dose) the level falls below ${f(tb.levelMgL)} mg/L in ${band(tb.hours)} h, at about ${when(tb.fromH + tb.hours.median, clockOf(a, tb.fromH + tb.hours.median))}${tb.pAboveAtHorizon > 0 ? ` (${pct(tb.pAboveAtHorizon)} still above after ${tb.horizonH} h)` : ''}`);
    }
    out.push('');
  }
  const flags = a.warnings.filter((w) => w.severity === 'flag' && w.code !== 'toxic-now');
  if (flags.length) {
    out.push(`Checks that bear on this advice${blocks.length ? ' (besides the blocks at the top)' : ''}:`);
    for (const w of flags) out.push(wrap(`  FLAG  ${t(w.message)}`, 96, '        '));
    out.push('');
  }
  out.push(`Doses and levels as read from the patient file${a.patient.clockOrigin ? ` (ward clock; h from the first dose at ${t(a.patient.clockOrigin)})` : ' (h from the first dose)'}:`);
  for (const d of a.patient.doses)
    out.push(`  dose   ${pad(when(d.timeH, d.clock), 26)}${pad(`${f(d.amountMg)} mg`, 10)}${d.route === 'infusion' ? `infusion over ${f(d.durationH)} h` : d.route}${d.ssIntervalH ? `, at steady state every ${f(d.ssIntervalH)} h` : ''}`);
  for (const l of a.patient.levels) out.push(`  level  ${pad(when(l.timeH, l.clock), 26)}${pad(`${l.censored ? '< ' : ''}${f(l.concMgL)} mg/L`, 14)}${l.kind ? t(l.kind) : ''}`);
  out.push(`  next dose ${when(a.patient.nextDoseH, a.patient.nextDoseClock)}${a.patient.nextDoseAssumed ? ' (assumed: one usual interval after the last dose)' : ''}`);
  out.push('');
  const m = a.model;
  out.push(`Model: ${t(m.name ?? '(unnamed)')} [${m.kind}, structure ${m.structure}]`);
  if (m.source) out.push(wrap(`  source: ${t(m.source)}`, 96, '    '));
  if (m.dataHash) out.push(`  fitted data ${t(m.dataHash)}${m.engineVersion ? `, engine ${t(m.engineVersion)}` : ''}`);
  const cov = Object.entries(a.patient.covariates).map(([k, v]) => `${t(k)} ${typeof v === 'number' ? String(Number(v.toPrecision(4))) : t(v)}`);
  out.push(wrap(`Patient: ${cov.join(', ')}`, 96, '  '));
  for (const [k, v] of Object.entries(a.patient.derived)) out.push(`  ${t(k)}: ${t(v)}`);
  if (tg.goals.length) {
    out.push(wrap(`Target source (${tg.sourceStatus}): ${t(tg.source)}`, 96, '    '));
    out.push(`  ${t(tg.localProtocol)}`);
  } else out.push('Target: none given (--target): metrics only, no ranking');
  out.push('');

  out.push('Details (statistics behind the advice):');
  out.push('  Population model values (the prior):');
  for (const v of m.values ?? []) out.push(wrap(`    ${t(v)}`, 96, '      '));
  const p = a.posterior;
  const d = p.diagnostics;
  out.push(`  Patient's parameters (${p.nDraws} draws; ${d.method === 'prior' ? 'from the population model alone: no levels' : d.method === 'post-fit' ? `post-fit draws of subject ${t(d.postFitSubject)} of the site fit` : 'from the levels by MCMC'}):`);
  out.push('    typical: the population value for this patient\'s covariates; MAP: the most likely value given the levels;');
  out.push('    mean, SD, 5 %-95 %: the spread of plausible values (90 % of them lie in 5 %-95 %).');
  out.push(`    ${pad('parameter', 16)}${pad('typical', 10)}${pad('MAP', 10)}${pad('mean', 10)}${pad('SD', 10)}${pad('5 %', 10)}95 %`);
  for (const name of Object.keys(p.map)) {
    const unit = a.units[name] ? ` ${a.units[name]}` : '';
    out.push(`    ${pad(`${name}${unit}`, 16)}${pad(f(p.typical[name]), 10)}${pad(f(p.map[name]), 10)}${pad(f(p.mean[name]), 10)}${pad(f(p.sd[name]), 10)}${pad(f(p.q05[name]), 10)}${f(p.q95[name])}`);
  }
  if (p.levels.length) {
    out.push('  Levels against the model:');
    out.push('    P(y_rep <= y): how often the model, before (prior) and after (posterior) seeing the levels, predicts');
    out.push('      a level at or below the measured one; near 0 or 1 the level is surprising.');
    out.push('    IWRES: measured minus predicted (MAP) level in units of the expected error; beyond +-3 is unusual.');
    out.push(`    ${pad('time', 26)}${pad('measured mg/L', 15)}${pad('MAP pred. mg/L', 16)}${pad('prior P', 9)}${pad('post. P', 9)}IWRES`);
    for (const l of p.levels)
      out.push(`    ${pad(when(l.timeH, clockOf(a, l.timeH)), 26)}${pad((l.censored ? '<' : '') + f(l.concMgL), 15)}${pad(f(l.predictedMap), 16)}${pad(f(l.priorPredictiveP), 9)}${pad(f(l.posteriorPredictiveP), 9)}${l.censored ? '-' : l.iwres === null ? 'extreme' : f(l.iwres)}`);
  }
  if (d.method === 'mcmc' && d.chains > 0) {
    out.push(`  Sampler: ${d.chains} chains, acceptance ${pct(d.acceptanceIndependence)} / ${pct(d.acceptanceRandomWalk)} (independence / random walk proposals)`);
    out.push(`    ESS ${d.ess.map((e) => Math.round(e)).join(', ')}: how many independent draws the draws are worth (200 or more wanted).`);
    out.push(`    R-hat ${d.rhat.map((r) => r.toFixed(3)).join(', ')}: agreement of the chains (below 1.05 good; 1.1 or more blocks).`);
  }
  const notes = a.warnings.filter((w) => w.severity === 'note');
  if (notes.length) {
    out.push('  Notes (do not change the advice):');
    for (const w of notes) out.push(wrap(`    ${t(w.message)}`, 96, '      '));
  }
  out.push(`  engine ${t(a.engineVersion)}, seed ${a.seed}`);
  return `${out.join('\n')}\n`;
}
