/**
 * The dispatch loop's wake-ups (src/lib/server/mail/wake.ts DispatchSignal), without any service: many
 * wake-ups while the dispatcher scans make one scan more, not one per wake-up (1,000 commits must not
 * mean 1,000 outbox scans); without a wake-up the wait lasts the poll interval. The cross-process part
 * (PUBLISH after COMMIT, the worker's subscription) is tests/integration/mail-wake.test.ts.
 */
import { describe, expect, it } from 'vitest';
import { DispatchSignal } from '../../src/lib/server/mail/wake';

describe('DispatchSignal', () => {
	it('1,000 wake-ups during a scan end the next wait at once, and only that one', async () => {
		const s = new DispatchSignal();
		for (let i = 0; i < 1000; i++) s.wake(); // commits while the loop scans
		const t0 = Date.now();
		expect(await s.wait(5_000)).toBe(true);
		expect(Date.now() - t0).toBeLessThan(50);
		// nothing since: the next wait is the poll (100 ms here), not another scan at once
		const t1 = Date.now();
		expect(await s.wait(100)).toBe(false);
		expect(Date.now() - t1).toBeGreaterThanOrEqual(95); // timers may fire a millisecond early
	});

	it('a wake-up during a wait ends it at once, and the wait after it is the full poll again', async () => {
		const s = new DispatchSignal();
		const t0 = Date.now();
		setTimeout(() => {
			s.wake();
			s.wake(); // two in the same turn: one wait ended
		}, 30);
		expect(await s.wait(5_000)).toBe(true);
		expect(Date.now() - t0).toBeLessThan(1_000);
		expect(await s.wait(60)).toBe(false);
		expect(s.wakeups).toBe(2);
	});
});
