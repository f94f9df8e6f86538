// Generator of Plateau's demo dataset. INVENTED SCENARIO: "Harbourside Infirmary, renal and
// infections ward" does not exist; every patient, dose and level is simulated from the example
// model resources/models/example-vancomycin-1cmt.json (example, not for clinical use).
//
// Run after a build:  npm run build && node resources/demo/make-demo.mjs
// Lays out dosing and sampling times and covariates (levels as 0 placeholders, in a temporary
// file), then writes resources/demo/ward-levels.csv by `plateau simulate --variability --seed 2026`.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { execFileSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import * as path from 'node:path';
import { createStreams } from '../../dist/engine/rng/index.js';

const here = path.dirname(fileURLToPath(import.meta.url));
const rng = createStreams('plateau-demo-ward').stream('design');
const rows = ['subject,time_h,event,amount_mg,duration_h,conc_mg_L,censored,lloq_mg_L,route,weight_kg,crcl_mL_min,age_y,sex'];
const round = (x, step) => Math.round(x / step) * step;

for (let i = 1; i <= 48; i++) {
  const id = `HX-${String(i).padStart(3, '0')}`;
  const weight = round(55 + 45 * rng.uniform(), 1);
  const crcl = round(30 + 100 * rng.uniform(), 1);
  const age = Math.round(25 + 60 * rng.uniform());
  const sex = rng.uniform() < 0.5 ? 'F' : 'M';
  const cov = `${weight},${crcl},${age},${sex}`;
  // Dose by a simple weight band, interval by renal function (common practice for a starting regimen).
  const dose = weight < 70 ? 1000 : 1250;
  const interval = crcl < 50 ? 24 : 12;
  const nDoses = interval === 12 ? 6 : 4;
  for (let d = 0; d < nDoses; d++) rows.push(`${id},${d * interval},dose,${dose},1.5,,,,iv,${cov}`);
  // Sampling: a trough before the 4th dose (or 3rd), sometimes a level 2 h after the end of that infusion.
  const k = interval === 12 ? 3 : 2;
  const trough = k * interval - round(0.25 + 0.5 * rng.uniform(), 0.25);
  rows.push(`${id},${trough},level,,,0,0,2,,${cov}`);
  if (rng.uniform() < 0.6) rows.push(`${id},${k * interval + 1.5 + round(1 + rng.uniform(), 0.25)},level,,,0,0,2,,${cov}`);
  if (rng.uniform() < 0.3) rows.push(`${id},${(nDoses - 1) * interval + interval - 0.5},level,,,0,0,2,,${cov}`);
}
const work = mkdtempSync(path.join(tmpdir(), 'plateau-demo-'));
const design = path.join(work, 'design.csv');
writeFileSync(design, rows.join('\n') + '\n');
execFileSync(process.execPath, [
  path.join(here, '../../dist/main/cli/plateau.js'), 'simulate',
  '--model', path.join(here, '../models/example-vancomycin-1cmt.json'),
  '--data', design,
  '--variability', '--seed', '2026',
  '--out', path.join(here, 'ward-levels.csv'),
], { stdio: 'inherit' });
rmSync(work, { recursive: true, force: true });
