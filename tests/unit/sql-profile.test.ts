import { describe, expect, it } from 'vitest';
import { recordStatement, startProfile, takeProfile } from '../../src/lib/server/sql-profile';

describe('sql-profile: the time each statement added', () => {
	it('pipelined statements overlap: each is given the time from the previous answer to its own, and these add up to the time anything was in flight', () => {
		startProfile();
		// (own time in ms, answer at ms) — START [0, 1]; a pipeline of three sent at 2: a [2, 5], b [2, 6], c [2, 8]; COMMIT [9, 10]
		recordStatement('Executed (default): START TRANSACTION', 1, 1);
		recordStatement('Executed (default): INSERT INTO a (x) VALUES (1)', 3, 5);
		recordStatement('Executed (default): INSERT INTO b (x) VALUES (1)', 4, 6);
		recordStatement('Executed (default): INSERT INTO c (x) VALUES (1)', 6, 8);
		recordStatement('Executed (default): COMMIT', 1, 10);
		const byKey = Object.fromEntries(takeProfile().map((x) => [x.statement, x]));
		// by hand: START 1 − 0 = 1; a 5 − max(2, 1) = 3; b 6 − max(2, 5) = 1; c 8 − max(2, 6) = 2; COMMIT 10 − max(9, 8) = 1
		expect(byKey['START TRANSACTION'].added_ms).toBe(1);
		expect(byKey['INSERT a'].added_ms).toBe(3);
		expect(byKey['INSERT b'].added_ms).toBe(1);
		expect(byKey['INSERT c'].added_ms).toBe(2);
		expect(byKey['COMMIT'].added_ms).toBe(1);
		// the sum, 8, is the union [0, 1] ∪ [2, 8] ∪ [9, 10] = 1 + 6 + 1; their own times add up to 15
		expect(Object.values(byKey).reduce((n, x) => n + x.added_ms, 0)).toBe(8);
		expect(Object.values(byKey).reduce((n, x) => n + x.total_ms, 0)).toBe(15);
	});

	it('records nothing outside startProfile … takeProfile', () => {
		recordStatement('Executed (default): COMMIT', 1, 10);
		startProfile();
		expect(takeProfile()).toEqual([]);
	});
});
