/**
 * Debian's Chromium driven by playwright-core (no browser download): a fresh profile per run,
 * every console error and failed request recorded so a test can fail on them, screenshots to
 * test-artifacts/ (gitignored).
 */
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { ROOT } from './host.js';

export const CHROMIUM = '/usr/bin/chromium';
export const CHROMIUM_ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'];
export const ARTIFACTS = path.join(ROOT, 'test-artifacts');

export interface Session {
  context: BrowserContext;
  page: Page;
  /** Console errors, page errors and failed requests seen so far. */
  failures: string[];
  shot: (name: string) => Promise<string>;
  close: () => Promise<void>;
}

export async function openBrowser(viewport = { width: 1366, height: 768 }): Promise<Session> {
  const profile = mkdtempSync(path.join(tmpdir(), 'plateau-chromium-'));
  const context = await chromium.launchPersistentContext(profile, { executablePath: CHROMIUM, headless: true, args: CHROMIUM_ARGS, viewport });
  const page = context.pages()[0] ?? (await context.newPage());
  const failures: string[] = [];
  page.on('console', (m) => {
    if (m.type() === 'error') failures.push(`console error: ${m.text()}`);
  });
  page.on('pageerror', (e) => failures.push(`page error: ${e.message}`));
  page.on('requestfailed', (r) => {
    // A download the page starts itself and the socket closing at the end are not failures.
    if (!r.url().startsWith('blob:')) failures.push(`request failed: ${r.url()} (${r.failure()?.errorText ?? ''})`);
  });
  page.on('response', (r) => {
    if (r.status() >= 400) failures.push(`HTTP ${r.status()}: ${r.url()}`);
  });
  mkdirSync(ARTIFACTS, { recursive: true });
  return {
    context,
    page,
    failures,
    shot: async (name) => {
      const file = path.join(ARTIFACTS, `${name}.png`);
      await page.screenshot({ path: file, fullPage: false });
      return file;
    },
    close: async () => {
      await context.close();
      rmSync(profile, { recursive: true, force: true });
    },
  };
}
