/** Spreadsheet import: one entry for the worker, the CLI and the UI. */
export * from './workbook.js';
export * from './values.js';
export * from './roles.js';
export * from './build.js';
export * from './export.js';
export { analyseWorkbook, type AnalyseOptions, type Analysis } from './analyse.js';
export * from './group.js';
