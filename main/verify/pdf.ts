/**
 * The report HTML printed to PDF by a headless Chromium (playwright-core), for the command
 * line. The desktop app prints the same HTML with Electron's printToPDF instead. No network:
 * the page is set from a string and every request it might make is refused.
 */
import { existsSync } from 'node:fs';

export class PdfUnavailableError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'PdfUnavailableError';
  }
}

const KNOWN_PATHS = [
  '/usr/bin/chromium',
  '/usr/bin/chromium-browser',
  '/usr/bin/google-chrome',
  'C:\\Program Files\\Google\\Chrome\\Application\\chrome.exe',
  'C:\\Program Files (x86)\\Microsoft\\Edge\\Application\\msedge.exe',
  '/Applications/Chromium.app/Contents/MacOS/Chromium',
  '/Applications/Google Chrome.app/Contents/MacOS/Google Chrome',
];

/** PLATEAU_CHROMIUM when set (it must exist), else the first Chromium-family browser found. */
export function findChromium(env: NodeJS.ProcessEnv = process.env): string | undefined {
  const own = env.PLATEAU_CHROMIUM;
  if (own) return existsSync(own) ? own : undefined;
  return KNOWN_PATHS.find((p) => existsSync(p));
}

export const PDF_HELP =
  'PDF output needs the desktop app (which prints the report itself) or a Chromium-family browser: set PLATEAU_CHROMIUM to its executable, or write --out report.html and print that file to PDF from any browser';

/** Print `html` to A4 PDF bytes with the Chromium at `executablePath`. */
export async function htmlToPdf(html: string, executablePath: string): Promise<Uint8Array> {
  let chromium: typeof import('playwright-core').chromium;
  try {
    ({ chromium } = await import('playwright-core'));
  } catch {
    throw new PdfUnavailableError(`the PDF printer (playwright-core) is not installed with this copy of Plateau. ${PDF_HELP}`);
  }
  // Chromium refuses its sandbox when run as root (containers, build machines).
  const asRoot = typeof process.getuid === 'function' && process.getuid() === 0;
  const browser = await chromium.launch({ executablePath, args: ['--headless', '--disable-gpu', ...(asRoot ? ['--no-sandbox'] : [])] }).catch((e: Error) => {
    throw new PdfUnavailableError(`could not start ${executablePath} (${e.message.split('\n')[0]}). ${PDF_HELP}`);
  });
  try {
    const page = await browser.newPage();
    await page.route('**/*', (route) => route.abort());
    await page.setContent(html, { waitUntil: 'load' });
    await page.emulateMedia({ media: 'print' });
    return new Uint8Array(await page.pdf({ format: 'A4', printBackground: true, preferCSSPageSize: true }));
  } finally {
    await browser.close();
  }
}
