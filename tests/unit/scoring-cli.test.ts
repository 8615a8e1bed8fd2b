import { describe, expect, it } from 'vitest';
import { ArraySplitter } from '../../scripts/cli/reconcile';
import { commandLine, runCommand } from '../helpers/cli';
import { specExample, wordRecall } from './scoring-fixtures';

/** The reconcile command, called in process as scripts/crosstally.ts calls it. */
const cli = (input: string, env: Record<string, string> = {}) => runCommand('reconcile', input, env);
const inProcess = (chunks: string[]) => runCommand('reconcile', chunks);

describe('the real command line (smoke test: tsx scripts/crosstally.ts reconcile)', () => {
	it('good input answers JSON with exit 0; malformed input exit 2 with a message and no stack', async () => {
		const good = await commandLine('reconcile', JSON.stringify(specExample()));
		expect(good.stderr).toBe('');
		expect(good.code).toBe(0);
		expect(JSON.parse(good.stdout).summary).toEqual({ fields_compared: 12, discrepancies: 10 });
		const bad = await commandLine('reconcile', '{"tests": [');
		expect(bad.code).toBe(2);
		expect(bad.stdout).toBe('');
		expect(bad.stderr).toMatch(/^reconcile: input: /);
		expect(bad.stderr).not.toMatch(/\n\s+at /);
		const unknown = await commandLine('no-such-command', '');
		expect(unknown.code).toBe(2);
		expect(unknown.stderr).toContain('usage: npm run --silent crosstally -- <reconcile|agreement|kinds>');
	});
});

describe('batch command end to end (in process)', () => {
	it('good input: the spec example gives 10 discrepancies, fields_compared 12, exit 0', async () => {
		const r = await cli(JSON.stringify(specExample()));
		expect(r.stderr).toBe('');
		expect(r.code).toBe(0);
		const out = JSON.parse(r.stdout);
		expect(out.summary).toEqual({ fields_compared: 12, discrepancies: 10 });
		expect(out.discrepancies[0]).toEqual({
			test: 'speeded-match',
			field: 'z',
			pass: 'first',
			kind: 'sign_flip',
			value: '-1.00',
			other: null,
			expected: 1,
			alternative: null,
			out_of_range: false
		});
	});
	it('an array of documents gives an array of results in the same order', async () => {
		const docs = [specExample(), wordRecall({ scaled: 15, t: 16 }), wordRecall()];
		const r = await cli(JSON.stringify(docs, null, 2));
		expect(r.code).toBe(0);
		const out = JSON.parse(r.stdout);
		expect(out).toHaveLength(3);
		expect(out[0].summary.discrepancies).toBe(10);
		expect(out[1].discrepancies.map((d: { kind: string }) => d.kind)).toEqual(['wrong_norm_group', 'transposition']);
		expect(out[1].discrepancies[1].out_of_range).toBe(true);
		expect(out[2]).toEqual({ discrepancies: [], summary: { fields_compared: 12, discrepancies: 0 } });
	});
	it('an empty array gives []', async () => {
		const r = await cli(' [ ] ');
		expect(r.code).toBe(0);
		expect(JSON.parse(r.stdout)).toEqual([]);
	});
	it('bad input: exit 2, the message names the path, nothing on stdout', async () => {
		const doc = specExample() as unknown as { norms: { sd: number }[] };
		doc.norms[0].sd = -6;
		const r = await cli(JSON.stringify(doc));
		expect(r.code).toBe(2);
		expect(r.stdout).toBe('');
		expect(r.stderr).toContain('norms[0].sd: must be above 0');
	});
	it('bad element in an array: exit 2, path prefixed with its index, nothing on stdout even though earlier elements were fine', async () => {
		const bad = specExample() as unknown as { passes: { scores: Record<string, Record<string, unknown>> }[] };
		bad.passes[1].scores['speeded-match'].raw = { value: 36 };
		const docs = [specExample(), specExample(), specExample(), bad, specExample()];
		const r = await cli(JSON.stringify(docs));
		expect(r.code).toBe(2);
		expect(r.stdout).toBe('');
		expect(r.stderr).toContain('[3].passes[1].scores.speeded-match.raw: expected number or string');
	});
	it('not JSON: exit 2 with a message, nothing on stdout', async () => {
		const r = await cli('{"tests": [');
		expect(r.code).toBe(2);
		expect(r.stdout).toBe('');
		expect(r.stderr).toMatch(/^reconcile: input: not valid JSON/);
	});
	it('results larger than the in-memory spool go through a temporary file and come out identical', async () => {
		const docs = Array.from({ length: 40 }, (_, i) => (i % 2 ? specExample() : wordRecall({ standard: 161 })));
		const text = JSON.stringify(docs);
		const inMemory = await cli(text);
		const spilled = await cli(text, { CROSSTALLY_SPOOL_LIMIT: '1000' });
		expect(spilled.code).toBe(0);
		expect(spilled.stdout).toBe(inMemory.stdout);
		expect(JSON.parse(spilled.stdout)).toHaveLength(40);
	});
});

describe('array splitter (in process)', () => {
	it('cuts elements correctly whatever the chunk boundaries, with brackets, commas and escapes inside strings', async () => {
		const tricky = specExample();
		tricky.passes[0].scorer = 'a "quoted", [bracketed] {braced} \\ scorer ]';
		const text = JSON.stringify([tricky, wordRecall(), tricky], null, 1);
		const whole = await inProcess([text]);
		const oneByOne = await inProcess(text.split(''));
		expect(whole.code).toBe(0);
		expect(oneByOne).toEqual(whole);
		expect(JSON.parse(whole.stdout)).toHaveLength(3);
	});
	it('reports each element with its index', () => {
		const seen: [string, number][] = [];
		const s = new ArraySplitter();
		s.push('[ {"a": "x,]"}, [1, 2]', (t, i) => seen.push([t.trim(), i]));
		s.push(' , "s" ]  ', (t, i) => seen.push([t.trim(), i]));
		expect(seen).toEqual([
			['{"a": "x,]"}', 0],
			['[1, 2]', 1],
			['"s"', 2]
		]);
		expect(s.closed).toBe(true);
	});
	it('multi-byte characters split across chunks survive', async () => {
		const doc = specExample();
		doc.passes[0].scorer = 'Zoë Ångström 测试';
		const bytes = Buffer.from(JSON.stringify([doc]));
		const { code, stdout } = await runCommand(
			'reconcile',
			Array.from({ length: bytes.length }, (_, i) => bytes.subarray(i, i + 1))
		);
		expect(code).toBe(0);
		expect(JSON.parse(stdout)[0].summary.discrepancies).toBe(10);
	});
	it('rejects trailing text, an unclosed array and empty elements', async () => {
		expect((await inProcess(['[] 1'])).stderr).toContain('unexpected text after the closing ]');
		expect((await inProcess(['[{}'])).stderr).toContain('the array is not closed');
		expect((await inProcess(['[,]'])).stderr).toContain('[0]: not valid JSON (missing value)');
		expect((await inProcess([''])).code).toBe(2);
	});
});
