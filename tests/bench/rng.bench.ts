/**
 * Random streams and normal-distribution functions: deviates per second and stream creations
 * per second (one per subject and chain in a fit). Figures only; nothing is asserted.
 */
import { createStreams, logNormalCdf, normalCdf, normalQuantile } from '../../engine/rng/index.js';

interface Figure { name: string; value: number; unit: string; target?: string; note?: string }

/** Runs `body(n)` with growing n until it takes about `seconds`; returns operations per second. */
function rate(body: (n: number) => number, seconds = 0.4): number {
  let n = 1000;
  let sink = 0;
  for (;;) {
    const t0 = performance.now();
    sink += body(n);
    const dt = (performance.now() - t0) / 1000;
    if (dt > seconds || n > 1e9) {
      if (sink === 42.4242) console.log(sink); // keep the work observable
      return n / dt;
    }
    n *= dt < seconds / 10 ? 10 : 2;
  }
}

export const suite = {
  name: 'rng',
  async run(): Promise<Figure[]> {
    const root = createStreams(1);
    const s = root.stream('bench');
    const buf = new Float64Array(1024);
    const uniforms = rate((n) => {
      let acc = 0;
      for (let i = 0; i < n; i++) acc += s.uniform();
      return acc;
    });
    const normals = rate((n) => {
      let acc = 0;
      for (let i = 0; i < n; i += 1024) {
        s.fillNormal(buf);
        acc += buf[0];
      }
      return acc;
    });
    const streams = rate((n) => {
      let acc = 0;
      for (let i = 0; i < n; i++) acc += root.stream('saem', 'subject', i, 'chain', 1).uniform();
      return acc;
    }, 0.3);
    const quantiles = rate((n) => {
      let acc = 0;
      for (let i = 0; i < n; i++) acc += normalQuantile((i % 9973 + 0.5) / 9973);
      return acc;
    });
    const cdf = rate((n) => {
      let acc = 0;
      for (let i = 0; i < n; i++) acc += normalCdf(-8 + (i % 1601) / 100);
      return acc;
    });
    const logCdf = rate((n) => {
      let acc = 0;
      for (let i = 0; i < n; i++) acc += logNormalCdf(-40 + (i % 4801) / 100);
      return acc;
    });
    return [
      { name: 'uniform deviates', value: uniforms, unit: '/s' },
      { name: 'normal deviates (fillNormal)', value: normals, unit: '/s' },
      { name: 'stream creations', value: streams, unit: '/s', note: 'one per subject and chain' },
      { name: 'normalQuantile', value: quantiles, unit: '/s' },
      { name: 'normalCdf', value: cdf, unit: '/s' },
      { name: 'logNormalCdf', value: logCdf, unit: '/s' },
    ];
  },
};
