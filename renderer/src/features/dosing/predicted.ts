/** The recommendation's uncertainty in ward words: each goal metric's median and 80 % interval. */
import { METRIC_LABELS, type MetricId } from '../../../../engine/dosing/targets.js';
import { sig } from '../../lib/format/numbers.js';
import type { Advice } from './types.js';

type Regimen = Advice['regimens'][number];

export function predictedText(advice: Advice, r: Regimen): string {
  const metrics = [...new Set((advice.target?.goals ?? []).map((g) => g.metric as MetricId))];
  const parts: string[] = [];
  for (const id of metrics) {
    const b = r.metrics[id];
    if (!b) continue;
    const { label, unit } = METRIC_LABELS[id];
    parts.push(`${label} ${sig(b.median)} ${unit} (80 % interval ${sig(b.q10)}–${sig(b.q90)})`);
  }
  return parts.length ? `Predicted at steady state: ${parts.join('; ')}` : '';
}

interface ProjectLike { datasets: Array<{ name: string; hash: string; subjects: number; levels: number }> }

/**
 * Where the model's values come from, in words: a site fit names the project's dataset it was
 * fitted to (found by the data's hash) rather than only the hash; a published model its source.
 */
export function provenanceText(advice: Advice, project: ProjectLike | null | undefined): string {
  const m = advice.model as Advice['model'] & { dataHash?: string; seed?: number | string; engineVersion?: string };
  const same = m.dataHash ? (project?.datasets ?? []).filter((d) => d.hash === m.dataHash) : [];
  const ds = same[0];
  const also = same.slice(1).map((d) => `"${d.name}"`);
  if (m.kind === 'site fit') {
    const data = ds ? `fitted at this site to the dataset "${ds.name}" (${ds.subjects} patients, ${ds.levels} levels${also.length ? `; the same data are also in the project as ${also.join(', ')}` : ''})` : m.dataHash ? `fitted at this site to a dataset not in this project (data ${m.dataHash.slice(0, 19)}…)` : 'fitted at this site';
    const own = m.source && !/^site fit( of dataset)?/.test(m.source) ? `; source: ${m.source.replace(/\.$/, '')}` : '';
    const run = [m.seed !== undefined ? `seed ${m.seed}` : '', m.engineVersion ? `engine ${m.engineVersion}` : ''].filter(Boolean).join(', ');
    return `${data}${run ? ` (fit with ${run})` : ''}${own}`;
  }
  return m.source ? `values from its source: ${m.source.replace(/\.$/, '')}` : 'no source given for its values';
}

// Covariates in words: one list for the whole renderer (lib/format/covariates.ts).
export { covariateName, covariateText } from '../../lib/format/covariates.js';
