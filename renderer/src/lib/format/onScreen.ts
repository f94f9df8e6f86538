/**
 * The engine's messages are written for the command line and the patient file (they name
 * options such as --day-first and fields such as next_dose_h). On screen the same advice must
 * point at the control in the view instead. These functions rewrite only those references; the
 * rest of each message is shown as the engine wrote it (nothing is dropped or softened).
 */

import { covariateLabel, covariateWording } from './covariates.js';

type Rule = readonly [RegExp, string];

const READING = 'under "Reading options" (section 1)';

/** Import view: options of `plateau check` -> the "Reading options" controls. */
const IMPORT_RULES: readonly Rule[] = [
  [/choose the order explicitly \(--day-first \/ --month-first\)/g, `choose the order in "Dates like 03/04" ${READING}`],
  [/confirm with --(day|month)-first/g, `confirm it in "Dates like 03/04" ${READING}`],
  [/choose --day-first or --month-first \(dateOrder in the mapping\)/g, `choose the order in "Dates like 03/04" ${READING}`],
  [/give the route of such doses with --default-route bolus\|infusion\|oral \(plateau check, then --save-mapping\), or map a route column/g, `choose "Route when none is given" ${READING}, or give a column the role of route`],
  [/give the LLOQ with --lloq <mg\/L> \(plateau check, then --save-mapping\), or add an LLOQ column/g, `give it in "LLOQ for "BLQ" without a limit" ${READING}, or give a column the role of LLOQ`],
  [/give --decimal-comma if the file writes decimals with a comma/g, `tick "Decimal comma" ${READING} if the file writes decimals with a comma`],
  [/in the mapping \(molarMassGPerMol\) or with --molar-mass/g, `in "Molar mass for µmol/L levels" ${READING}`],
];

export function importWording(message: string): string {
  return covariateWording(IMPORT_RULES.reduce((m, [re, to]) => m.replace(re, to), message));
}

const NEXT_DOSE = '"Next dose can start at" (2. Patient)';

/** Field names of the patient file -> the labels of the patient form. */
const FIELD_NAMES: readonly Rule[] = [
  [/\.time_h\b/g, ' time'],
  [/\.time\b/g, ' time'],
  [/\.amount_mg\b/g, ' amount (mg)'],
  [/\.duration_h\b/g, ' infusion (h)'],
  [/\.conc_mg_L\b/g, ' level (mg/L)'],
  [/\.lloq_mg_L\b/g, ' limit of quantification (mg/L)'],
  [/\.censored\b/g, ' below LLOQ'],
  [/\.kind\b/g, ' drawn as'],
  [/\.route\b/g, ' route'],
];

/** Estimation settings in fit messages -> their labels under "Estimation settings" in Models. */
const SETTING_LABELS: Record<string, string> = {
  searchMinIterations: 'Search phase: at least (iterations)',
  searchMaxIterations: 'Search phase: at most (iterations)',
  averagingIterations: 'Averaging (iterations)',
  settleWindow: 'Settle window (iterations)',
};

/** Results, Fit queue (and fit warnings repeated in Dosing): settings named as on the Models view. */
export function fitWording(message: string): string {
  return covariateWording(message)
    .replace(/raise estimation\.(\w+)/g, (all, key: string) => (SETTING_LABELS[key] ? `raise "${SETTING_LABELS[key]}" in Models (estimation settings) and fit again` : all))
    .replace(/\bestimation\.(\w+)/g, (all, key: string) => (SETTING_LABELS[key] ? `"${SETTING_LABELS[key]}" (Models, estimation settings)` : all));
}

/** Dosing view: checks and problems that name a patient-file field or a command-line option. */
export function dosingWording(message: string): string {
  let m = fitWording(message.replace(/\bcovariates\.(\w+)/g, (_all, key: string) => `Patient ${covariateLabel(key)}`))
    .replace(/give next_dose_h to set it/g, `set it in ${NEXT_DOSE}`)
    .replace(/give --target to rank regimens/g, 'choose a target preset under 3. Target to rank regimens')
    .replace(/\bnext_dose_h\b|\bnext_dose\b/g, NEXT_DOSE)
    .replace(/A named user checks every value against the publication, corrects the file, then records it with: plateau models --verify <file> --by <name>/g, 'A named user checks every value against the publication, corrects the model file, then records the check with the command-line tool (plateau models --verify); until then, enter the checked values under "Enter a model from a publication…" in 1. Prior model');
  m = m.replace(/\b(doses|levels|renal)\[(\d+)\]((?:\.[a-z_A-Z]+)?)/g, (_all, list: string, i: string, field: string) => {
    const name = list === 'doses' ? 'Dose' : list === 'levels' ? 'Level' : 'Creatinine entry';
    const f = FIELD_NAMES.reduce((acc, [re, to]) => acc.replace(re, to), field);
    return `${name} ${Number(i) + 1}${f.startsWith('.') ? '' : f}`;
  });
  return m;
}
