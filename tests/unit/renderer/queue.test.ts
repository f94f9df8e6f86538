import { describe, expect, it } from 'vitest';
import { addProgress, emptyTrace, parseSeeds } from '../../../renderer/src/features/queue/queue.svelte.js';

describe('Fit queue state', () => {
  it('keeps each estimate by iteration and marks where averaging began', () => {
    const t = emptyTrace();
    addProgress(t, { jobId: 'j1', phase: 'search', iteration: 1, maxIterations: 700, estimates: { CL: 5, V: 40 } });
    addProgress(t, { jobId: 'j1', phase: 'search', iteration: 2, maxIterations: 700, estimates: { CL: 4.8 } });
    addProgress(t, { jobId: 'j1', phase: 'averaging', iteration: 3, maxIterations: 700, estimates: { CL: 4.7, V: 41 } });
    addProgress(t, { jobId: 'j1', phase: 'averaging', iteration: 3, maxIterations: 700, estimates: { CL: 9 } });
    expect(t.iterations).toEqual([1, 2, 3]);
    expect(t.series.get('CL')).toEqual([5, 4.8, 4.7]);
    // A value missing from a report is a gap (NaN), never the previous value repeated.
    expect(t.series.get('V')).toEqual([40, NaN, 41]);
    expect(t.averagingFrom).toBe(3);
  });
  it('thins long traces but keeps the last point', () => {
    const t = emptyTrace();
    for (let i = 1; i <= 1000; i++) addProgress(t, { jobId: 'j', phase: 'search', iteration: i, maxIterations: 1000, estimates: { CL: i } });
    expect(t.iterations.length).toBeLessThanOrEqual(600);
    expect(t.iterations[t.iterations.length - 1]).toBe(1000);
    expect(t.series.get('CL')!.length).toBe(t.iterations.length);
  });
  it('reads seeds and refuses what is not a seed', () => {
    expect(parseSeeds('1, 2 3')).toEqual({ seeds: [1, 2, 3] });
    expect(parseSeeds('1.5').problem).toMatch(/not a seed/);
    expect(parseSeeds('').problem).toMatch(/at least one/);
  });
});
