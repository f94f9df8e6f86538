/**
 * Covariates in words with their units, the one place the renderer names them: the engine and
 * the files keep their keys ("crcl_mL_min", "weight_kg": unit in the name), people read
 * "creatinine clearance (mL/min)". Keys the app does not know are shown as they are.
 */

/** Key pattern, display name, unit. Serum creatinine may come in either unit. */
const COVARIATE_WORDS: ReadonlyArray<readonly [RegExp, string, string]> = [
  [/^(weight|wt)_kg$/i, 'weight', 'kg'],
  [/^height_cm$/i, 'height', 'cm'],
  [/^age_y$/i, 'age', 'years'],
  [/^scr_mg_dL$/i, 'serum creatinine', 'mg/dL'],
  [/^scr_umol_L$/i, 'serum creatinine', 'µmol/L'],
  [/^crcl_mL_min$/i, 'creatinine clearance', 'mL/min'],
  [/^egfr_mL_min(_1\.73m2)?$/i, 'eGFR', 'mL/min'],
  [/^sex$/i, 'sex', ''],
];

/** The display name without its unit ("crcl_mL_min" -> "creatinine clearance"). */
export function covariateName(key: string): string {
  return COVARIATE_WORDS.find(([re]) => re.test(key))?.[1] ?? key;
}

/** The display name with its unit ("crcl_mL_min" -> "creatinine clearance (mL/min)"). */
export function covariateLabel(key: string): string {
  const w = COVARIATE_WORDS.find(([re]) => re.test(key));
  if (!w) return key;
  return w[2] ? `${w[1]} (${w[2]})` : w[1];
}

/** A value in words: "weight_kg", 78 -> "weight 78 kg". */
export function covariateText(key: string, value: unknown): string {
  const v = typeof value === 'number' ? String(Number(value.toPrecision(4))) : String(value);
  for (const [re, word, unit] of COVARIATE_WORDS) if (re.test(key)) return `${word} ${v}${unit ? ` ${unit}` : ''}`;
  return `${key} ${v}`;
}

/**
 * A known covariate key standing as a word of a message. Not one inside a file path
 * ("covariates.weight_kg", see dosingWording) or in quotes (a key to type into a file), and not
 * "sex", which is already a word.
 */
const KEY_IN_TEXT = /(?<![\w."'])((?:weight|wt)_kg|height_cm|age_y|scr_mg_dL|scr_umol_L|crcl_mL_min|egfr_mL_min(?:_1\.73m2)?)(?![\w"'])/gi;

/**
 * An engine message with its covariate keys in words with units:
 * "crcl_mL_min = 25 lies outside (30-120)" -> "creatinine clearance (mL/min) = 25 lies outside (30-120)".
 * Nothing else in the message changes.
 */
export function covariateWording(message: string): string {
  return (
    message
      .replace(KEY_IN_TEXT, (key: string) => covariateLabel(key))
      // "covariate creatinine clearance (mL/min) (on CL)" reads as one parenthesis.
      .replace(/ \((kg|cm|years|mg\/dL|µmol\/L|mL\/min)\) \((on|used on) /g, ' ($1, $2 ')
  );
}

/** A covariate range in words: "crcl_mL_min", 30, 120 -> "creatinine clearance 30–120 mL/min". */
export function covariateRange(key: string, lo: number, hi: number): string {
  const w = COVARIATE_WORDS.find(([re]) => re.test(key));
  return w ? `${w[1]} ${lo}–${hi}${w[2] ? ` ${w[2]}` : ''}` : `${key} ${lo}–${hi}`;
}
