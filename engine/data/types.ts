/**
 * Plateau's in-memory dataset (DESIGN.md §2). Times are hours from the subject's first event,
 * amounts mg, concentrations mg/L. Build datasets through `createDataset` (dataset.ts), which
 * validates every record; the types alone promise nothing about the values.
 */
import { printable } from '../text/printable.js';

/** How a dose enters the body. `bolus` and `infusion` go into the central compartment. */
export type Route = 'bolus' | 'infusion' | 'oral';

export interface Dose {
  /** Start of the dose, h from the subject's first event. */
  timeH: number;
  amountMg: number;
  route: Route;
  /** Infusion duration (h); 0 for bolus and oral doses. */
  durationH: number;
  /**
   * When set, the dose is the last of an infinite train given every `intervalH` hours before
   * `timeH`, so the system is at steady state just before it (and the dose itself is given).
   */
  steadyStateIntervalH?: number;
  /** 1-based line or row in the source file, for messages. */
  sourceRow?: number;
}

export interface Observation {
  timeH: number;
  /** Measured concentration (mg/L). For a censored level: the LLOQ itself. */
  valueMgL: number;
  /** True when the level was below the lower limit of quantification. */
  censored: boolean;
  /** Lower limit of quantification (mg/L), when known. */
  lloqMgL?: number;
  sourceRow?: number;
}

/** Covariate values: numbers for continuous covariates, strings for categorical ones. */
export type CovariateValue = number | string;

export interface Subject {
  id: string;
  /** Constant per subject. A null-prototype record (never a plain object built from input keys). */
  covariates: Readonly<Record<string, CovariateValue>>;
  /** Sorted by time. */
  doses: readonly Dose[];
  /** Sorted by time. */
  observations: readonly Observation[];
}

export interface Dataset {
  subjects: readonly Subject[];
  /** Covariate column names, in source order. */
  covariateNames: readonly string[];
}

/** One problem with a dataset record: where it is and what is wrong. */
export interface DataProblem {
  subject?: string;
  /** 1-based line (CSV) or row (spreadsheet) in the source, when known. */
  row?: number;
  field?: string;
  message: string;
}

/** Thrown when records are invalid; carries every problem found, not only the first. */
export class DataError extends Error {
  readonly problems: readonly DataProblem[];
  /** The file (or other source) the problems are in, when known. */
  readonly source?: string;
  constructor(problems: readonly DataProblem[], source?: string) {
    super(DataError.describe(problems, source));
    this.name = 'DataError';
    this.problems = problems;
    if (source !== undefined) this.source = source;
  }
  /** Text from files (subject ids, cell values) is printed with control characters escaped. */
  static describe(problems: readonly DataProblem[], source?: string): string {
    const shown = problems.slice(0, 20).map((p) => {
      const where = [
        p.row !== undefined ? `line ${p.row}` : undefined,
        p.subject !== undefined ? `subject ${p.subject}` : undefined,
        p.field !== undefined ? `field ${p.field}` : undefined,
      ]
        .filter(Boolean)
        .join(', ');
      return printable(where ? `${where}: ${p.message}` : p.message);
    });
    const more = problems.length > 20 ? `\n... and ${problems.length - 20} more` : '';
    return `${problems.length} problem(s) in the data${source !== undefined ? ` (${printable(source)})` : ''}:\n${shown.join('\n')}${more}`;
  }
}
