/**
 * Installation verification for every host: `runVerification` (progress callback, AbortSignal,
 * JSON report) and `renderReportHtml` (self-contained printable HTML; the app prints it with
 * Electron's printToPDF, the CLI with headless Chromium in pdf.ts).
 */
export { runVerification, SIGN_OFF_LINES, type VerifyOptions } from './runner.js';
export { renderReportHtml } from './reportHtml.js';
export { VerifySetupError, validationDir } from './suite.js';
export type { CheckResult, CheckRow, CheckStatus, VerificationReport, VerifyProgress } from './types.js';
