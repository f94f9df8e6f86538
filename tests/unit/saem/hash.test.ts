import { createHash } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { createDataset } from '../../../engine/data/dataset.js';
import { datasetHash, sha256Text } from '../../../engine/data/hash.js';

describe('sha256', () => {
  it('matches the FIPS 180-2 example and node:crypto on varied inputs', () => {
    // FIPS 180-2 appendix B.1 ("abc"), from memory; node:crypto is the independent check.
    expect(sha256Text('abc')).toBe('ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad');
    for (const text of ['', 'a', 'x'.repeat(55), 'y'.repeat(56), 'z'.repeat(64), 'é😀 levels,1.5\n'.repeat(40)])
      expect(sha256Text(text)).toBe(createHash('sha256').update(text, 'utf8').digest('hex'));
  });
  it('hashes a dataset by its content', () => {
    const mk = (v: number) => createDataset([{ id: 'A', doses: [{ timeH: 0, amountMg: 1, route: 'bolus', durationH: 0 }], observations: [{ timeH: 1, valueMgL: v, censored: false }] }]);
    expect(datasetHash(mk(1))).toBe(datasetHash(mk(1)));
    expect(datasetHash(mk(1))).not.toBe(datasetHash(mk(1.0000001)));
  });
});
