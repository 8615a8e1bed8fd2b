/** Automated accessibility checks with axe-core, run inside the page (CSP bypassed for the test only). */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import type { Page } from 'playwright-core';

const require = createRequire(import.meta.url);
const source = readFileSync(require.resolve('axe-core/axe.min.js'), 'utf8');

export interface AxeViolation {
	id: string;
	impact: string | null;
	help: string;
	nodes: { target: string[] }[];
}

/** Serious and critical violations on the current page (WCAG 2.1 A and AA rules). */
export async function seriousViolations(page: Page): Promise<AxeViolation[]> {
	// inject axe once per document (a resize keeps the document; a navigation starts a new one)
	if (!(await page.evaluate('typeof window.axe !== "undefined"'))) await page.evaluate(source);
	const result = (await page.evaluate(`axe.run(document, { runOnly: { type: 'tag', values: ['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa'] } })`)) as {
		violations: AxeViolation[];
	};
	return result.violations.filter((v) => v.impact === 'serious' || v.impact === 'critical');
}

export const describeViolations = (vs: AxeViolation[]) =>
	vs.map((v) => `${v.id} (${v.impact}): ${v.help} at ${v.nodes.map((n) => n.target.join(' ')).join(', ')}`).join('\n');
