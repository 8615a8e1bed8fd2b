/**
 * The review e-mail renderer (src/lib/server/mail/reminders/render.ts): pure inputs → subject, plain
 * text and HTML, with the clock passed in. No database, Redis, worker or app. The expected strings are
 * written by hand from the wording the reviewers get (the integration tests in
 * tests/integration/notifications*.test.ts check timing and exactly-once delivery).
 */
import { describe, expect, it } from 'vitest';
import { reviewMailBody, waitedWords, type MailDiscrepancy, type ReviewMailContent } from '../../src/lib/server/mail/reminders/render';

const transposition: MailDiscrepancy = {
	test_code: 'wr',
	test_name: 'Word Recall',
	field: 'standard',
	pass: 'second',
	kind: 'transposition',
	value: '161',
	other: '116',
	expected: '116',
	out_of_range: 1
};
const signFlip: MailDiscrepancy = {
	test_code: 'wr',
	test_name: 'Word Recall',
	field: 'z',
	pass: 'first',
	kind: 'sign_flip',
	value: '-1.07',
	other: '1.07',
	expected: null,
	out_of_range: 0
};
const rawBoth: MailDiscrepancy = {
	test_code: 'ds',
	test_name: null,
	field: 'raw',
	pass: 'both',
	kind: 'wrong_digit',
	value: '34',
	other: '74',
	expected: null,
	out_of_range: 0
};

const base: ReviewMailContent = {
	reminderNo: 0,
	code: 'K-0042',
	link: 'https://crosstally.example/protocols/42/review',
	reviewerName: 'Rita Reviewer',
	battery: 'Memory battery',
	testDate: '2026-11-20',
	discrepancies: [transposition, signFlip],
	escalated: false,
	intervalMinutes: 1440,
	detail: 'full',
	round: 1,
	since: new Date('2026-12-01T09:30:00Z'),
	timeZone: 'UTC'
};
/** The clock: two days and half an hour after the protocol reached review. */
const NOW = new Date('2026-12-03T10:00:00Z');

describe('review e-mail: the first message', () => {
	it('subject and plain text, word for word', () => {
		const m = reviewMailBody(base, NOW);
		expect(m.subject).toBe('Review needed: protocol K-0042 (2 discrepancies)');
		expect(m.text).toBe(
			[
				'Hello Rita Reviewer,',
				'',
				'Protocol K-0042 is ready for review: 2 discrepancies need your decision.',
				'',
				'Protocol: K-0042',
				'Battery: Memory battery',
				'Test date: 2026-11-20',
				'',
				'Discrepancies (characters that differ between the passes are in [brackets]):',
				'',
				'1. Word Recall (wr), standard score (second pass)',
				'   First pass:  1[16]',
				'   Second pass: 1[61]',
				'   Recomputed:  116',
				'   Kind: Digits swapped (out of range): Two neighbouring digits swapped, as in 47 for 74.',
				'',
				'2. Word Recall (wr), z-score (first pass)',
				'   First pass:  [-]1.07',
				'   Second pass: 1.07',
				'   Recomputed:  none (raw score missing or out of range)',
				'   Kind: Direction wrong way round: The direction is the wrong way round: this is the score the raw score would get if the test’s direction were reversed (the sign of z not reversed on a lower-is-better test, or reversed on a higher-is-better one).',
				'',
				'Open the Review screen: https://crosstally.example/protocols/42/review',
				'',
				// a day after NOW
				'Until every discrepancy is resolved, a reminder goes out every day; the next is due 2026-12-04 10:00 GMT+0.'
			].join('\n')
		);
	});

	it('HTML: the values with the differing characters marked, the link as the button, the frame', () => {
		const { html } = reviewMailBody(base, NOW);
		expect(html.startsWith('<!doctype html><html><body')).toBe(true);
		expect(html).toContain('<h1 style="font-size:20px;margin:0 0 12px">Review needed: protocol K-0042 (2 discrepancies)</h1>');
		expect(html).toMatch(/>1<mark [^>]*>16<\/mark><\/td>/);
		expect(html).toMatch(/>1<mark [^>]*>61<\/mark><\/td>/);
		expect(html).toMatch(/><mark [^>]*>-<\/mark>1\.07<\/td>/);
		expect(html).toContain('<strong>Digits swapped</strong> <span style="color:#9a3412">(out of range)</span>');
		expect(html).toContain('href="https://crosstally.example/protocols/42/review"');
		expect(html).toContain('Protocol: K-0042<br/>Battery: Memory battery<br/>Test date: 2026-11-20');
		expect(html).toContain('names protocols by pseudonymous code only');
		expect(html, 'no hydration markers in an e-mail').not.toContain('<!--');
		// the first message says nothing about waiting
		expect(html).not.toContain('Waiting for review');
	});

	it('no discrepancies: a sign-off request, no list and no reminder schedule', () => {
		const m = reviewMailBody({ ...base, discrepancies: [] }, NOW);
		expect(m.subject).toBe('Sign-off needed: protocol K-0042 (no discrepancies)');
		expect(m.text).toContain('Protocol K-0042 is ready for review: both passes and the recomputation agree everywhere. It needs your sign-off.');
		expect(m.text).not.toContain('reminder goes out');
		expect(m.html).not.toContain('<table role="presentation" cellpadding="0" cellspacing="0" width="100%" style="border-collapse');
	});

	it('a test without a name shows its code; a raw score without a recomputation says so; empty values say (empty)', () => {
		const m = reviewMailBody({ ...base, discrepancies: [rawBoth, { ...transposition, value: null }] }, NOW);
		expect(m.text).toContain(
			'1. ds, raw score (the passes disagree: one or both may be wrong)\n   First pass:  [3]4\n   Second pass: [7]4\n   Recomputed:  none for raw scores'
		);
		// value null on the second pass's row: the second pass entered nothing, so all of the first pass's value is marked
		expect(m.text).toContain('   First pass:  [116]\n   Second pass: (empty)');
		expect(m.html).toContain('<em style="color:#4a5563">empty</em>');
	});

	it('whom a row is about, in the Review screen’s words: never that both passes are wrong when they differ', () => {
		// both passes wrote 112 and the recomputation gives 121: a shared error, the one case that names both passes
		const shared: MailDiscrepancy = { ...rawBoth, field: 'standard', kind: 'wrong_scale', value: '112', other: '112', expected: '121' };
		const m = reviewMailBody({ ...base, discrepancies: [rawBoth, shared, signFlip] }, NOW);
		expect(m.text).toContain('1. ds, raw score (the passes disagree: one or both may be wrong)');
		expect(m.text).toContain('2. ds, standard score (same value in both passes)');
		expect(m.text).toContain('3. Word Recall (wr), z-score (first pass)');
		expect(m.html).toContain('raw score · the passes disagree: one or both may be wrong');
		expect(m.text).not.toContain('(both passes)');
	});

	it('a reopened round names the round and the reason; an amendment names the field', () => {
		const reopened = reviewMailBody({ ...base, round: 3, why: { action: 'reopen', reason: 'Wrong norms' } }, NOW);
		expect(reopened.text).toContain('It was reopened for review round 3. Reason: Wrong norms');
		// the subject tells the inbox it is not the first round's message again
		expect(reopened.subject).toBe('Review needed again (round 3): protocol K-0042 (2 discrepancies)');
		expect(reviewMailBody({ ...base, round: 3, reminderNo: 2 }, NOW).subject).toBe('Reminder 2 (round 3): protocol K-0042 has 2 open discrepancies');
		const amended = reviewMailBody({ ...base, round: 2, why: { action: 'amendment', reason: 'Typo', field: 'wr standard score' } }, NOW);
		expect(amended.text).toContain('It was amended (wr standard score) and needs review round 2. Reason: Typo');
	});

	it('detail "counts": how many of each kind and the link, and no value at all', () => {
		const m = reviewMailBody({ ...base, discrepancies: [transposition, signFlip, { ...transposition, field: 'raw' }], detail: 'counts' }, NOW);
		const line =
			'Discrepancies: 3 (2 Digits swapped, 1 Direction wrong way round). The values are on the Review screen (this site keeps scores out of e-mail).';
		expect(m.text).toContain(line);
		expect(m.html).toContain(`<p>${line}</p>`);
		for (const part of [m.text, m.html]) for (const v of ['161', '116', '1.07']) expect(part).not.toContain(v);
	});
});

describe('review e-mail: reminders, with the clock passed in', () => {
	const reminder = (n: number, over: Partial<ReviewMailContent> = {}) =>
		reviewMailBody({ ...base, reminderNo: n, discrepancies: [transposition, signFlip, rawBoth], ...over }, NOW);

	it('reminder 1: subject, "Still open", how long it has waited and when the next is due', () => {
		const m = reminder(1);
		expect(m.subject).toBe('Reminder 1: protocol K-0042 has 3 open discrepancies');
		expect(m.text).toContain('Reminder 1: protocol K-0042 still has 3 open discrepancies.\n\nWaiting for review since 2026-12-01 09:30 GMT+0 (2 days).');
		expect(m.text).toContain('Still open (characters that differ between the passes are in [brackets]):');
		expect(m.text).toContain('the next is due 2026-12-04 10:00 GMT+0.');
		expect(m.html).toContain('<p style="color:#4a5563">Waiting for review since 2026-12-01 09:30 GMT+0 (2 days).</p>');
		expect(m.text).not.toContain('The leads are copied in');
	});

	it('the times are the clinic zone’s and move with the clock', () => {
		// Vienna is UTC+1 in December; 3 s interval (0.05 min) as the notification tests use
		const m = reviewMailBody(
			{ ...base, reminderNo: 2, intervalMinutes: 0.05, timeZone: 'Europe/Vienna', since: new Date('2026-12-03T09:55:30Z') },
			new Date('2026-12-03T10:00:00Z')
		);
		expect(m.text).toContain('Waiting for review since 2026-12-03 10:55 GMT+1 (4 minutes).');
		expect(m.text).toContain('a reminder goes out every 3 seconds; the next is due 2026-12-03 11:00 GMT+1.');
		const later = reviewMailBody({ ...base, reminderNo: 2, since: new Date('2026-12-03T07:00:00Z') }, new Date('2026-12-03T10:59:59Z'));
		expect(later.text).toContain('(3 hours).');
	});

	it('escalated: the subject says so and the leads are told why they are copied in', () => {
		const m = reminder(2, { escalated: true });
		expect(m.subject).toBe('Escalated reminder 2: protocol K-0042 has 3 open discrepancies');
		expect(m.text).toContain('The leads are copied in because this protocol has had 1 reminder without being resolved.');
		expect(reminder(4, { escalated: true }).text).toContain('has had 3 reminders without being resolved.');
		expect(m.html).toContain('<p style="color:#9a3412"><strong>The leads are copied in because');
	});

	it('the interval in words', () => {
		expect(reminder(1, { intervalMinutes: 2880 }).text).toContain('a reminder goes out every 2 days;');
		expect(reminder(1, { intervalMinutes: 60 }).text).toContain('a reminder goes out every hour;');
		expect(reminder(1, { intervalMinutes: 180 }).text).toContain('a reminder goes out every 3 hours;');
		expect(reminder(1, { intervalMinutes: 90 }).text).toContain('a reminder goes out every 90 minutes;');
	});

	it('waited time in the largest whole unit', () => {
		expect(waitedWords(59_999)).toBe('less than a minute');
		expect(waitedWords(60_000)).toBe('1 minute');
		expect(waitedWords(59 * 60_000 + 59_999)).toBe('59 minutes');
		expect(waitedWords(3_600_000)).toBe('1 hour');
		expect(waitedWords(23 * 3_600_000 + 3_599_999)).toBe('23 hours');
		expect(waitedWords(86_400_000)).toBe('1 day');
		expect(waitedWords(10 * 86_400_000)).toBe('10 days');
	});
});

describe('review e-mail: escaping', () => {
	it('a reason, a name or a value with <script> and & comes out escaped in the HTML and as written in the text', () => {
		const m = reviewMailBody(
			{
				...base,
				reviewerName: 'Ann & <b>Bob</b>',
				battery: 'A&B <i>',
				round: 2,
				why: { action: 'reopen', reason: 'see <script>alert("x")</script> & fix' },
				discrepancies: [{ ...transposition, test_name: '<img src=x onerror=alert(1)>', value: '<1', other: '1&' }]
			},
			NOW
		);
		expect(m.html).not.toContain('<script>');
		expect(m.html).not.toContain('<img');
		expect(m.html).not.toContain('<b>Bob');
		expect(m.html).toContain('<p>Hello Ann &amp; &lt;b>Bob&lt;/b>,</p>');
		expect(m.html).toContain('Reason: see &lt;script>alert("x")&lt;/script> &amp; fix</strong>');
		expect(m.html).toContain('Battery: A&amp;B &lt;i>');
		expect(m.html).toContain('&lt;img src=x onerror=alert(1)> (wr)');
		// the entered values inside the <mark> of the differing characters: second pass "<1", first pass "1&"
		expect(m.html).toMatch(/<mark [^>]*>[^<]*&lt;[^<]*<\/mark><\/td>/);
		expect(m.html).toMatch(/<mark [^>]*>[^<]*&amp;[^<]*<\/mark><\/td>/);
		expect(m.text).toMatch(/First pass: {2}\[?1\[?&/);
		expect(m.text).toMatch(/Second pass: \[?<\[?1/);
		// the plain text is not HTML: as written
		expect(m.text).toContain('Hello Ann & <b>Bob</b>,');
		expect(m.text).toContain('Reason: see <script>alert("x")</script> & fix');
	});

	it('a link with a quote cannot leave its attribute', () => {
		const { html } = reviewMailBody({ ...base, link: 'https://x.example/"><script>' }, NOW);
		expect(html).toContain('href="https://x.example/&quot;>&lt;script>"');
		expect(html).not.toContain('<script>');
	});
});
