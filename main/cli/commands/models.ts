/** `plateau models [--json]`: the structural model catalogue. */
import { listStructuralModels } from '../../../engine/models/catalogue.js';
import { booleanFlag, parseArgs } from '../args.js';
import type { CliCommand } from '../types.js';

const usage = `Usage: plateau models [--json]

Lists the structural models: id, parameters with units and starting values, equation.
  --json   print the catalogue as JSON`;

export const command: CliCommand = {
  name: 'models',
  summary: 'List the structural PK models and their parameters',
  usage,
  async run(argv, io) {
    const args = parseArgs(argv, { json: { type: 'boolean' } }, { usage });
    const models = listStructuralModels();
    if (booleanFlag(args, 'json')) {
      const json = models.map((m) => ({
        id: m.id,
        label: m.label,
        compartments: m.compartments,
        analytic: m.analytic,
        equation: m.equation,
        sketch: m.sketch,
        parameterOrder: [...m.parameterOrder],
        parameters: m.parameters.map((p) => ({
          name: p.name,
          unit: p.unit,
          description: p.description,
          defaultInitial: p.defaultInitial,
          transforms: [...p.transforms],
          ...(p.defaultWhenAbsent !== undefined ? { defaultWhenAbsent: p.defaultWhenAbsent } : {}),
        })),
      }));
      io.stdout(`${JSON.stringify(json, null, 2)}\n`);
      return 0;
    }
    const out: string[] = [];
    for (const m of models) {
      out.push(`${m.id}  ${m.label}${m.analytic ? '' : ' (numerical ODE solution)'}`);
      out.push(`  equation: ${m.equation}`);
      const w = Math.max(...m.parameters.map((p) => p.name.length));
      const uw = Math.max(...m.parameters.map((p) => (p.unit || '-').length));
      for (const p of m.parameters) {
        const absent = p.defaultWhenAbsent !== undefined ? `; ${p.defaultWhenAbsent} when absent` : '';
        out.push(
          `  ${p.name.padEnd(w)}  ${(p.unit || '-').padEnd(uw)}  ${p.description} (start ${p.defaultInitial}; transforms ${p.transforms.join('/')}${absent})`,
        );
      }
      out.push('');
    }
    out.push('Absorption parameters (ka, tlag, F) apply when the data hold oral doses; ka is then required.');
    io.stdout(`${out.join('\n')}\n`);
    return 0;
  },
};
