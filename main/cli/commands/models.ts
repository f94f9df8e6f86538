/** `plateau models [--json]`: the structural model catalogue. */
import { listStructuralModels } from '../../../engine/models/catalogue.js';
import { printable } from '../../../engine/text/printable.js';
import { listLiteratureModels, verifyLiteratureModel } from '../../services/doseService.js';
import { resolvePath } from '../../services/files.js';
import { booleanFlag, parseArgs, stringFlag } from '../args.js';
import { UsageError, type CliCommand } from '../types.js';

const usage = `Usage: plateau models [--json]
       plateau models --library
       plateau models --verify <model.json> --by <name> [--date YYYY-MM-DD]

Lists the structural models: id, parameters with units and starting values, equation.
  --json       print the catalogue as JSON
  --library    list the published models in resources/models/literature with their status;
               dose advice from a model not verified against its publication is blocked
  --verify <file>  record that you checked every value of a published model (its "literature"
               block) against the publication: writes literature.verified {by, date, fingerprint
               of the values}; a later edit of any value voids it
  --by <name>  who checked the values (required with --verify)
  --date <d>   date of the check (default today, YYYY-MM-DD)`;

export const command: CliCommand = {
  name: 'models',
  summary: 'List the structural PK models and their parameters',
  usage,
  async run(argv, io) {
    const args = parseArgs(argv, { json: { type: 'boolean' }, library: { type: 'boolean' }, verify: { type: 'string' }, by: { type: 'string' }, date: { type: 'string' } }, { usage });
    const verify = stringFlag(args, 'verify');
    if (verify !== undefined) {
      const by = stringFlag(args, 'by');
      if (by === undefined || !by.trim()) throw new UsageError('--verify needs --by <name>: the person who checked every value against the publication', usage);
      const date = stringFlag(args, 'date') ?? new Date().toISOString().slice(0, 10);
      const v = await verifyLiteratureModel(resolvePath(io.cwd, verify), by, date);
      io.stdout(`${printable(verify)}: verified by ${printable(v.by)} on ${v.date} (values ${v.values}); editing any value voids this\n`);
      return 0;
    }
    if (stringFlag(args, 'by') !== undefined || stringFlag(args, 'date') !== undefined) throw new UsageError('--by and --date go with --verify', usage);
    if (booleanFlag(args, 'library')) {
      const lib = await listLiteratureModels();
      if (booleanFlag(args, 'json')) io.stdout(`${JSON.stringify(lib, null, 2)}\n`);
      else for (const m of lib) io.stdout(`${printable(m.file)}\n  ${printable(m.drug)}: ${printable(m.citation)}\n  ${m.verified ? 'VERIFIED' : 'UNVERIFIED (advice blocked)'}: ${printable(m.status)}\n`);
      return 0;
    }
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
