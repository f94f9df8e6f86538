/** Units of the figures in dose advice, for advice.json's `units` and the printed tables. */

/** Parameter units (L/h for clearances, L for volumes, 1/h for ka, h for tlag, mg/h for Vmax). */
export function parameterUnit(name: string): string {
  if (/^(CL|Q\d?)$/.test(name)) return 'L/h';
  if (/^V\d?$/.test(name)) return 'L';
  if (name === 'ka') return '1/h';
  if (name === 'tlag') return 'h';
  if (name === 'F') return 'fraction';
  if (name === 'Vmax') return 'mg/h';
  if (name === 'Km') return 'mg/L';
  return '';
}

/** Units of the advice record's fields, by field name. */
export const UNITS: Record<string, string> = {
  timeH: 'h from the first dose',
  clock: 'ward clock, local time',
  amountMg: 'mg',
  doseMg: 'mg',
  loadingDoseMg: 'mg',
  dailyDoseMg: 'mg per 24 h',
  intervalH: 'h',
  durationH: 'h',
  concMgL: 'mg/L',
  lloqMgL: 'mg/L',
  auc24: 'mg.h/L',
  auc: 'mg.h/L',
  trough: 'mg/L',
  peak: 'mg/L',
  peakAt: 'mg/L',
  ftAbove: '% of the interval',
  levelAtNextDose: 'mg/L',
  highest: 'mg/L',
  thresholdMgL: 'mg/L',
  hours: 'h',
  pTarget: 'probability (0-1)',
  pToxic: 'probability (0-1)',
};
