/** Seeds per fit: bounds of the `seeds` setting and of --seeds (re-exported by fitSeeds.ts; here so the CLI can state them without loading the fit). */
export const SEEDS_MIN = 1;
export const SEEDS_MAX = 16;
