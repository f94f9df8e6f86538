/** Column roles in plain words for the role pickers (the ids are the engine's, engine/import/roles.ts). */
import { ROLES, type Role } from '../../../../engine/import/roles.js';

export const ROLE_LABELS: Record<Role, string> = {
  patientId: 'Patient identifier',
  dateTime: 'Date and time',
  date: 'Date',
  time: 'Clock time',
  elapsedH: 'Hours from the first event',
  kind: 'Event kind (dose or level)',
  doseAmount: 'Dose amount',
  doseUnit: 'Dose unit',
  route: 'Route',
  infusionDuration: 'Infusion duration',
  infusionStart: 'Infusion start',
  infusionEnd: 'Infusion end',
  infusionRate: 'Infusion rate',
  steadyStateInterval: 'Steady-state interval',
  levelValue: 'Level (concentration)',
  levelUnit: 'Level unit',
  lloq: 'Limit of quantification',
  censoredFlag: 'Below-limit flag',
  comment: 'Sample comment',
  weight: 'Weight',
  height: 'Height',
  age: 'Age',
  birthDate: 'Date of birth',
  sex: 'Sex',
  creatinine: 'Serum creatinine',
  creatinineUnit: 'Creatinine unit',
  covariate: 'Other covariate',
  ignore: 'Not imported',
};

export const ROLE_OPTIONS: ReadonlyArray<{ id: Role; label: string }> = ROLES.map((id) => ({ id, label: ROLE_LABELS[id] }));

/** The file's bytes as base64 (chunked: a 50 MB file must not overflow the argument list). */
export function toBase64(bytes: Uint8Array): string {
  let s = '';
  const CHUNK = 0x8000;
  for (let i = 0; i < bytes.length; i += CHUNK) s += String.fromCharCode(...bytes.subarray(i, i + CHUNK));
  return btoa(s);
}
