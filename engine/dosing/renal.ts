/**
 * Renal function from serum creatinine. Creatinine clearance by Cockcroft & Gault, Nephron
 * 1976;16:31-41 (from memory): CrCl (mL/min) = (140 - age) x weight / (72 x SCr mg/dL),
 * x 0.85 for women. Weight is total body weight, as in the original paper; other weight
 * choices (ideal, adjusted) are a local-protocol decision, not made here.
 */

/** Serum creatinine: 1 mg/dL = 88.4 umol/L (molar mass of creatinine 113.12 g/mol). */
export const UMOL_L_PER_MG_DL = 88.4;

export const COCKCROFT_GAULT_LABEL = 'creatinine clearance by Cockcroft-Gault 1976 (total body weight)';

export type Sex = 'M' | 'F';

export interface CockcroftGaultInput {
  ageY: number;
  weightKg: number;
  scrMgDl: number;
  sex: Sex;
}

export function scrUmolToMgDl(scrUmolL: number): number {
  return scrUmolL / UMOL_L_PER_MG_DL;
}

/** CrCl in mL/min; NaN when an input is outside the formula's domain (age >= 140, SCr <= 0). */
export function cockcroftGault(input: CockcroftGaultInput): number {
  const { ageY, weightKg, scrMgDl, sex } = input;
  if (!(ageY >= 0 && ageY < 140 && weightKg > 0 && scrMgDl > 0)) return NaN;
  const male = ((140 - ageY) * weightKg) / (72 * scrMgDl);
  return sex === 'F' ? 0.85 * male : male;
}
