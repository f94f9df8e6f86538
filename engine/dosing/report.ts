/** Plain-text rendering of dose advice for the terminal (the caution is printed first and last). */
import type { Advice } from './advise.js';
import { formatRegimen } from './regimens.js';
import { describeCondition, describeToxic, METRIC_LABELS, type MetricId } from './targets.js';
import type { Band } from './summary.js';

const f = (x: number | null | undefined): string => {
  if (x === null || x === undefined || !Number.isFinite(x)) return '-';
  const a = Math.abs(x);
  return a >= 1000 ? x.toFixed(0) : a >= 100 ? x.toFixed(0) : a >= 10 ? x.toFixed(1) : a >= 1 ? x.toFixed(2) : x.toPrecision(2);
};
const band = (b: Band | undefined) => (b ? `${f(b.median)} [${f(b.q10)}-${f(b.q90)}]` : '-');
const pct = (p: number | null) => (p === null ? '-' : Number.isFinite(p) ? `${Math.round(100 * p)} %` : '-');
const pad = (s: string, n: number) => (s.length >= n ? s : s + ' '.repeat(n - s.length));

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

export function formatAdvice(a: Advice, maxRegimens = 10): string {
  const out: string[] = [];
  out.push(wrap(a.caution));
  out.push('');
  const status = a.status === 'advice' ? 'advice' : a.status === 'blocked' ? 'BLOCKED: NO DOSE ADVICE (see the blocking checks below)' : 'BLOCKED (regimens shown on request: do not use without resolving the blocking checks)';
  out.push(`Plateau dose advice for patient ${a.patient.id}: ${status}`);
  out.push(`  engine ${a.engineVersion}, seed ${a.seed}`);
  const m = a.model;
  out.push(`Model: ${m.name ?? '(unnamed)'} [${m.kind}, structure ${m.structure}]`);
  if (m.source) out.push(wrap(`  source: ${m.source}`, 96, '    '));
  if (m.dataHash) out.push(`  fitted data ${m.dataHash}${m.engineVersion ? `, engine ${m.engineVersion}` : ''}`);
  const cov = Object.entries(a.patient.covariates).map(([k, v]) => `${k} ${typeof v === 'number' ? String(Number(v.toPrecision(4))) : v}`);
  out.push(`Patient: ${cov.join(', ')}; ${a.patient.nDoses} dose(s), ${a.patient.nLevels} level(s)${a.patient.clockOrigin ? `; t = 0 at ${a.patient.clockOrigin}` : ''}`);
  for (const [k, v] of Object.entries(a.patient.derived)) out.push(`  ${k}: ${v}`);
  const t = a.target;
  if (t.goals.length) {
    out.push(`Target: ${t.label}`);
    out.push(`  goal: ${t.goals.map((c) => describeCondition(t, c)).join(' and ')}${t.toxic.length ? `; toxic: ${t.toxic.map((c) => describeToxic(t, c)).join(' or ')}` : ''}`);
    out.push(wrap(`  source (${t.sourceStatus}): ${t.source}`, 96, '    '));
    out.push(`  ${t.localProtocol}`);
  } else out.push('Target: none given (--target): metrics only, no ranking');
  out.push('');
  const p = a.posterior;
  const d = p.diagnostics;
  const how = d.method === 'prior' ? 'drawn from the population prior (no levels)' : d.method === 'post-fit' ? `post-fit draws of subject ${d.postFitSubject} of the site fit (no new levels)` : `MCMC, ${d.chains} chains, acceptance ${pct(d.acceptanceIndependence)} / ${pct(d.acceptanceRandomWalk)} (independence / random walk), ESS ${d.ess.map((e) => Math.round(e)).join(', ')}, R-hat ${d.rhat.map((r) => r.toFixed(3)).join(', ')}`;
  out.push(`Posterior (${p.nDraws} draws; ${how}):`);
  out.push(`  ${pad('parameter', 10)}${pad('typical', 10)}${pad('MAP', 10)}${pad('mean', 10)}${pad('SD', 10)}${pad('5 %', 10)}95 %`);
  for (const name of Object.keys(p.map)) out.push(`  ${pad(name, 10)}${pad(f(p.typical[name]), 10)}${pad(f(p.map[name]), 10)}${pad(f(p.mean[name]), 10)}${pad(f(p.sd[name]), 10)}${pad(f(p.q05[name]), 10)}${f(p.q95[name])}`);
  if (p.levels.length) {
    out.push('  levels: time h, measured mg/L, MAP prediction, prior / posterior predictive P(y_rep <= y), IWRES at the MAP');
    for (const l of p.levels) out.push(`    ${pad(f(l.timeH), 8)}${pad((l.censored ? '<' : '') + f(l.concMgL), 10)}${pad(f(l.predictedMap), 10)}${pad(f(l.priorPredictiveP), 8)}${pad(f(l.posteriorPredictiveP), 8)}${l.censored ? '-' : l.iwres === null ? 'extreme' : f(l.iwres)}`);
  }
  out.push('');
  if (a.warnings.length) {
    out.push('Checks:');
    for (const w of a.warnings) out.push(wrap(`  ${w.severity === 'block' ? 'BLOCK' : w.severity === 'flag' ? 'FLAG ' : 'note '} ${w.message}`, 96, '        '));
    out.push('');
  }
  if (a.regimens.length) {
    const metricIds = (['auc24', 'trough', 'peak', 'peakAt', 'ftAbove'] as MetricId[]).filter((id) => a.regimens[0].metrics[id]);
    out.push(`${a.regimens.length === 1 && a.candidatesEvaluated === 1 ? 'Evaluated regimen' : `Ranked regimens (best ${Math.min(maxRegimens, a.regimens.length)} of ${a.candidatesEvaluated})`}, steady state, median [80 % interval]:`);
    const width = Math.max(36, ...a.regimens.slice(0, maxRegimens).map((r) => formatRegimen(r).length + 2));
    out.push(`  ${pad('#', 4)}${pad('regimen', width)}${pad('P(target)', 11)}${pad('P(toxic)', 10)}${metricIds.map((id) => pad(`${METRIC_LABELS[id].label.split(' (')[0]}${id === 'peakAt' ? '@' : ''} ${METRIC_LABELS[id].unit}`, 24)).join('')}`);
    a.regimens.slice(0, maxRegimens).forEach((r, i) => {
      out.push(`  ${pad(String(i + 1), 4)}${pad(formatRegimen(r), width)}${pad(pct(r.pTarget), 11)}${pad(pct(r.pToxic), 10)}${metricIds.map((id) => pad(band(r.metrics[id]), 24)).join('')}`);
    });
    out.push('');
    for (const r of a.regimens) if (r.explanation) out.push(wrap(`  ${r.explanation}`, 96, '     '));
    out.push('');
  }
  const fc = a.forecast;
  if (fc && fc.intervals.length) {
    out.push(`Forecast of ${a.regimens[0] ? formatRegimen(a.regimens[0]) : 'the regimen'} from ${f(a.patient.nextDoseH)} h${a.patient.nextDoseAssumed ? ' (assumed next dose time)' : ''}, median [80 %] (95 % bands in advice.json):`);
    for (const iv of fc.intervals) out.push(`  interval ${iv.index} (${f(iv.startH)}-${f(iv.endH)} h, ${iv.doseMg} mg): peak ${band(iv.peak)}, trough ${band(iv.trough)} mg/L, AUC24 ${band(iv.auc24)} mg.h/L`);
    if (fc.timeBelow) {
      const tb = fc.timeBelow;
      out.push(`  after the last given dose (no further dose) the level falls below ${f(tb.levelMgL)} mg/L in ${band(tb.hours)} h${tb.pAboveAtHorizon > 0 ? ` (${pct(tb.pAboveAtHorizon)} still above after ${tb.horizonH} h)` : ''}`);
    }
    out.push('');
  }
  out.push(wrap(a.caution));
  return `${out.join('\n')}\n`;
}
