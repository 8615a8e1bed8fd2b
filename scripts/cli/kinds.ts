/**
 * `npm run --silent crosstally -- kinds`
 *
 * Prints the kinds of discrepancy the `reconcile` command names, in the order they are tried, each
 * with the name people read (Review chips, e-mails, Audit, CSV) and its one-line explanation, from
 * the one list in src/lib/scoring/kinds.ts. Reads nothing; exit 0.
 *
 *   {"kinds": [{"kind": "missing", "name": "Missing", "explanation": "Left empty: …"}, …]}
 */
import type { Readable, Writable } from 'node:stream';
import { kindList } from '../../src/lib/scoring/kinds';

export async function run(_input: Readable, output: Writable): Promise<number> {
	const kinds = kindList().map((k) => ({ kind: k.id, name: k.name, explanation: k.explanation }));
	output.write(JSON.stringify({ kinds }, null, 2) + '\n');
	return 0;
}
