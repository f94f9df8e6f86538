/**
 * The structural model catalogue: every model's id, parameters (units, meaning, starting values,
 * transforms), a one-line equation and a sketch description for the UI.
 *
 * Conventions shared by every model (see schedule.ts):
 * - Parameter vector: disposition parameters, then ka, tlag, F (`parameterOrder`). When the
 *   history has no oral dose, ka, tlag and F are ignored and may be NaN. Callers fill absent
 *   tlag / F with `defaultWhenAbsent` (0 h, 1).
 * - A level at exactly a dose time is the level before that dose (TDM convention: a trough drawn
 *   at the dose time is pre-dose). A level at a steady-state dose time is the steady-state trough.
 * - Levels before the first dose are 0.
 * - A steady-state dose resets every compartment to the steady state of its own infinite train
 *   (common practice); earlier doses stop counting. Then the dose itself is given at its time.
 * - Bolus and infusion go into the central compartment; oral doses into a depot, F times the
 *   amount, entering at dose time + tlag, absorbed first-order with rate ka.
 * - Several steady-state doses at one time superpose (linear models); the Michaelis-Menten
 *   model refuses them at prepare.
 * The same rules, as text for the UI: MODEL_CONVENTIONS.
 */
import type { Dose } from '../data/types.js';
import { makeThreeCompartmentModes, oneCompartmentModes, prepareLinear, twoCompartmentModes } from './linear.js';
import { prepareMichaelisMenten } from './michaelisMenten.js';
import type { ParameterInfo, PkParameterName, SolverSettings, StructuralModel, StructureId } from './types.js';

/** The timing and dosing conventions every model follows, as plain text for the UI and the docs. */
export const MODEL_CONVENTIONS: readonly string[] = Object.freeze([
  'A level taken at exactly a dose time is the level before that dose (TDM convention: a trough drawn at the dose time is pre-dose).',
  'Levels before the first dose are 0.',
  'Bolus and infusion doses go into the central compartment; an infusion runs at amount / duration, and overlapping infusions add.',
  'Oral doses put F x amount into an absorption depot at dose time + tlag; absorption is first-order with rate ka.',
  'A steady-state dose (with an interval) stands for an infinite train of that dose before it: every compartment is reset to that steady state (earlier doses stop counting), then the dose itself is given. A level at its time is the steady-state trough.',
  'Several steady-state doses at one time add their trains (linear models only).',
  'Michaelis-Menten: steady state is found by iterating one dosing interval to its fixed point; none exists when F x dose / interval reaches Vmax.',
]);

const info = (
  name: PkParameterName,
  unit: string,
  description: string,
  defaultInitial: number,
  transforms: ParameterInfo['transforms'] = ['log', 'none'],
  defaultWhenAbsent?: number,
): ParameterInfo => ({ name, unit, description, defaultInitial, transforms, ...(defaultWhenAbsent !== undefined ? { defaultWhenAbsent } : {}) });

// Starting values: a typical adult, round numbers (common practice); a fit moves away from them.
const ABSORPTION: readonly ParameterInfo[] = [
  info('ka', '1/h', 'first-order absorption rate constant (oral doses)', 1),
  info('tlag', 'h', 'absorption lag time (oral doses)', 0.5, ['log', 'none'], 0),
  info('F', '', 'bioavailability: fraction of an oral dose reaching the circulation', 0.8, ['logit', 'log', 'none'], 1),
];

const SHARED_NOTE =
  'Oral doses: depot with first-order absorption (ka), lag tlag, bioavailability F. A level at a dose time is taken before the dose.';

function linearModel(
  id: StructureId,
  label: string,
  disposition: readonly ParameterInfo[],
  nModes: number,
  modes: () => Parameters<typeof prepareLinear>[2],
  equation: string,
  sketch: string,
): StructuralModel {
  const parameters = [...disposition, ...ABSORPTION];
  return Object.freeze({
    id,
    label,
    parameterOrder: Object.freeze(parameters.map((p) => p.name)),
    parameters: Object.freeze(parameters),
    compartments: nModes,
    equation,
    sketch: `${sketch} ${SHARED_NOTE}`,
    analytic: true,
    prepare: (doses: readonly Dose[], timesH: ArrayLike<number>, solver?: Partial<SolverSettings>) =>
      prepareLinear(nModes, disposition.length, modes(), doses, timesH, solver),
  });
}

const MODELS: readonly StructuralModel[] = Object.freeze([
  linearModel(
    '1cmt',
    'One compartment, linear elimination',
    [info('CL', 'L/h', 'clearance', 4), info('V', 'L', 'volume of distribution', 50)],
    1,
    () => oneCompartmentModes,
    'C(t) = A(t)/V, dA/dt = input(t) - (CL/V) A; after a bolus D: C = D/V exp(-CL/V t)',
    'One central compartment (volume V) receiving bolus and infusion doses, eliminated with clearance CL.',
  ),
  linearModel(
    '2cmt',
    'Two compartments, linear elimination',
    [
      info('CL', 'L/h', 'clearance from the central compartment', 4),
      info('V1', 'L', 'central volume', 20),
      info('Q', 'L/h', 'inter-compartmental clearance', 5),
      info('V2', 'L', 'peripheral volume', 40),
    ],
    2,
    () => twoCompartmentModes,
    'C = A1/V1; dA1/dt = input - (CL/V1) A1 - (Q/V1) A1 + (Q/V2) A2; dA2/dt = (Q/V1) A1 - (Q/V2) A2',
    'Central compartment (V1) with elimination CL, exchanging with one peripheral compartment (V2) by clearance Q.',
  ),
  linearModel(
    '3cmt',
    'Three compartments, linear elimination',
    [
      info('CL', 'L/h', 'clearance from the central compartment', 4),
      info('V1', 'L', 'central volume', 15),
      info('Q2', 'L/h', 'inter-compartmental clearance to the first peripheral compartment', 8),
      info('V2', 'L', 'first peripheral volume', 30),
      info('Q3', 'L/h', 'inter-compartmental clearance to the second peripheral compartment', 2),
      info('V3', 'L', 'second peripheral volume', 60),
    ],
    3,
    makeThreeCompartmentModes,
    'C = A1/V1; dA1/dt = input - (CL+Q2+Q3)/V1 A1 + (Q2/V2) A2 + (Q3/V3) A3; dAj/dt = (Qj/V1) A1 - (Qj/Vj) Aj',
    'Central compartment (V1) with elimination CL, exchanging with two peripheral compartments (V2 by Q2, V3 by Q3).',
  ),
  Object.freeze({
    id: '1cmt-mm' as const,
    label: 'One compartment, Michaelis-Menten elimination',
    parameterOrder: Object.freeze(['Vmax', 'Km', 'V', 'ka', 'tlag', 'F'] as PkParameterName[]),
    parameters: Object.freeze([
      info('Vmax', 'mg/h', 'maximum elimination rate', 20),
      info('Km', 'mg/L', 'concentration at half the maximum elimination rate', 4),
      info('V', 'L', 'volume of distribution', 50),
      ...ABSORPTION,
    ]),
    compartments: 1,
    equation: 'C = A/V; dA/dt = input(t) - Vmax C / (Km + C)',
    sketch: `One central compartment (volume V) with saturable elimination (Vmax, Km), solved numerically (adaptive Runge-Kutta). ${SHARED_NOTE}`,
    analytic: false,
    prepare: (doses: readonly Dose[], timesH: ArrayLike<number>, solver?: Partial<SolverSettings>) => prepareMichaelisMenten(doses, timesH, solver),
  }),
]);

const BY_ID = new Map<string, StructuralModel>(MODELS.map((m) => [m.id, m]));

/** The model with this id; throws naming the valid ids when there is none. */
export function getStructuralModel(id: StructureId): StructuralModel {
  const m = BY_ID.get(id);
  if (!m) throw new Error(`unknown structural model "${String(id)}": use one of ${MODELS.map((x) => x.id).join(', ')}`);
  return m;
}

/** Every model in the catalogue, in display order. */
export function listStructuralModels(): StructuralModel[] {
  return [...MODELS];
}

/**
 * The structural model with solver settings bound (for the ODE-solved models; analytic models
 * ignore them): `prepare` uses `solver` unless its caller passes settings of its own.
 */
export function structuralModelWithSolver(id: StructureId, solver: Partial<SolverSettings> | undefined): StructuralModel {
  const base = getStructuralModel(id);
  if (!solver || base.analytic) return base;
  return { ...base, prepare: (doses, timesH, own) => base.prepare(doses, timesH, { ...solver, ...own }) };
}
