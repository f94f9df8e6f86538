/**
 * axe-core (Deque's accessibility engine, open source) run inside the page. Its source is
 * evaluated through the DevTools protocol, which the page's Content-Security-Policy does not
 * govern, so the app keeps its strict policy during the check.
 */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import type { Page } from 'playwright-core';

const axeSource = readFileSync(createRequire(import.meta.url).resolve('axe-core/axe.min.js'), 'utf8');

export interface AxeViolation {
  id: string;
  impact: string | null;
  help: string;
  nodes: string[];
}

/** Serious and critical violations (WCAG 2 A and AA rules) on the page as it is now. */
export async function seriousViolations(page: Page): Promise<AxeViolation[]> {
  await page.evaluate(axeSource);
  const result = (await page.evaluate(`axe.run(document, { runOnly: { type: 'tag', values: ['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa'] } }).then(r => r.violations.map(v => ({ id: v.id, impact: v.impact, help: v.help, nodes: v.nodes.slice(0, 5).map(n => n.target.join(' ')) })))`)) as AxeViolation[];
  return result.filter((v) => v.impact === 'serious' || v.impact === 'critical');
}
