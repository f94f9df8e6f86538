/** Seeded random datasets (invented, format test only): write -> read gives the same dataset. */
import { describe, expect, it } from 'vitest';
import { parseCanonicalCsv, writeCanonicalCsv } from '../../../engine/data/canonicalCsv.js';
import { createDataset, type SubjectInput } from '../../../engine/data/dataset.js';
import type { Dataset, Route } from '../../../engine/data/types.js';
import { createStreams, type RngStream } from '../../../engine/rng/index.js';

const AWKWARD = ['plain', 'with,comma', 'with "quotes"', 'line\nbreak', 'crlf\r\nbreak', ' padded ', 'ünïcødé', '=1+1', '0012', ''];

function awkwardNumber(r: RngStream): number {
  switch (r.int(6)) {
    case 0:
      return r.uniform() * 1000;
    case 1:
      return Math.exp(40 * (r.uniform() - 0.5));
    case 2:
      return r.int(1000);
    case 3:
      return 0.1 * r.int(100);
    case 4:
      return Number.MIN_VALUE * (1 + r.int(5));
    default:
      return 1e300 * r.uniform();
  }
}

function randomDataset(r: RngStream): Dataset {
  const nSubjects = 1 + r.int(6);
  const inputs: SubjectInput[] = [];
  for (let s = 0; s < nSubjects; s++) {
    const routes: Route[] = ['bolus', 'infusion', 'oral'];
    const doses = Array.from({ length: r.int(4) }, () => {
      const route = routes[r.int(3)];
      const durationH = route === 'infusion' ? awkwardNumber(r) || 0.5 : 0;
      return {
        timeH: awkwardNumber(r),
        amountMg: awkwardNumber(r) || 1,
        route,
        durationH,
        ...(r.uniform() < 0.2 ? { steadyStateIntervalH: 2 * durationH + 1 + 24 * r.uniform() } : {}),
      };
    });
    const observations = Array.from({ length: r.int(5) }, () => {
      const censored = r.uniform() < 0.3;
      const lloq = awkwardNumber(r) || 0.1;
      return censored
        ? { timeH: awkwardNumber(r), valueMgL: lloq, censored, lloqMgL: lloq }
        : { timeH: awkwardNumber(r), valueMgL: (r.uniform() < 0.5 ? -1 : 1) * awkwardNumber(r), censored, ...(r.uniform() < 0.5 ? { lloqMgL: lloq } : {}) };
    });
    // A level needs a dose at or before it (the shared first-dose rule, engine/data/rules.ts).
    if (observations.length > 0) doses.unshift({ timeH: 0, amountMg: 1, route: 'bolus', durationH: 0 });
    const covariates: Record<string, number | string> = Object.create(null);
    if (r.uniform() < 0.8) covariates.weight_kg = awkwardNumber(r);
    const ward = AWKWARD[r.int(AWKWARD.length)];
    if (ward !== '') covariates.ward = `${ward}#`; // keeps the column text, whatever the draw
    inputs.push({ id: `${AWKWARD[r.int(AWKWARD.length - 1)].trim() || 'x'}-${s}`, covariates, doses, observations });
  }
  return createDataset(inputs, ['weight_kg', 'ward']);
}

const strip = (d: Dataset) => JSON.parse(JSON.stringify(d, (k, v) => (k === 'sourceRow' ? undefined : v)));

describe('canonical CSV round trip on seeded random datasets', () => {
  it('200 datasets read back identically, LF and CRLF', () => {
    const root = createStreams('csv-round-trip');
    let tested = 0;
    for (let k = 0; k < 200; k++) {
      const ds = randomDataset(root.stream('dataset', k));
      // A dataset whose subjects have no rows at all cannot be written (no row carries the subject).
      if (ds.subjects.some((s) => s.doses.length + s.observations.length === 0)) continue;
      tested++;
      for (const newline of ['\n', '\r\n'] as const) {
        const text = writeCanonicalCsv(ds, { newline });
        const back = parseCanonicalCsv(text);
        const want = strip(ds);
        // Covariate names absent from every subject are not written as a column.
        expect(strip(back).subjects).toEqual(want.subjects);
      }
    }
    expect(tested).toBeGreaterThan(50);
  });
});
