/**
 * One vocabulary: kind names, field names and statuses come from one list each, and every place
 * people read them (Review chip, e-mail, Audit, CSV, the batch command) uses that list.
 */
import { describe, expect, it } from 'vitest';
import { PassThrough } from 'node:stream';
import { KINDS, KIND_NAMES, kindName, kindList, explainKind } from '../../src/lib/scoring/kinds';
import { KIND_LABELS, FIELD_LABELS, fieldWords, statusWords } from '../../src/lib/status';
import { kindName as mailKindName, FIELD_WORDS } from '../../src/lib/server/mail/reminders/render';
import { run } from '../../scripts/cli/kinds';

describe('one vocabulary', () => {
	it('every kind the engine names has a name and an explanation', () => {
		for (const k of KINDS) {
			expect(KIND_NAMES[k], k).toBeTruthy();
			expect(explainKind(k), k).toBeTruthy();
			expect(KIND_NAMES[k]).not.toContain('_');
		}
	});
	it('the Review chip and the e-mail say the same words: "Digits swapped", never "transposition"', () => {
		expect(KIND_LABELS.transposition).toBe('Digits swapped');
		expect(mailKindName('transposition')).toBe('Digits swapped');
		for (const k of KINDS) expect(mailKindName(k)).toBe(KIND_LABELS[k]);
	});
	it('field names: the e-mail words are the screen labels in a sentence', () => {
		expect(FIELD_WORDS.raw).toBe('raw score');
		expect(FIELD_WORDS.t).toBe('T-score');
		expect(FIELD_WORDS.z).toBe('z-score');
		for (const f of Object.keys(FIELD_LABELS)) expect(FIELD_WORDS[f].toLowerCase()).toBe(FIELD_LABELS[f].toLowerCase());
		expect(fieldWords('standard')).toBe('standard score');
	});
	it('statuses in words: history reads "First pass → Second pass", not draft → awaiting_second', () => {
		expect(`${statusWords('draft')} → ${statusWords('awaiting_second')}`).toBe('First pass → Second pass');
		expect(statusWords('in_review')).toBe('In review');
	});
	it('the batch command documents the same list', async () => {
		const out = new PassThrough();
		const chunks: Buffer[] = [];
		out.on('data', (c) => chunks.push(c));
		expect(await run(new PassThrough(), out)).toBe(0);
		const doc = JSON.parse(Buffer.concat(chunks).toString()) as { kinds: { kind: string; name: string; explanation: string }[] };
		expect(doc.kinds.map((k) => k.kind)).toEqual([...KINDS]);
		expect(doc.kinds.find((k) => k.kind === 'transposition')?.name).toBe('Digits swapped');
		expect(kindList().length).toBe(KINDS.length);
		expect(kindName('some_future_kind')).toBe('some future kind');
	});
});
