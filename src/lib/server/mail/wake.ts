/**
 * Waking the outbox dispatcher when mail is written (issue 18). A change that wrote outbox rows
 * publishes on a Redis channel once it has COMMITTED (./outbox.ts, through `afterCommit` in ../db.ts: a
 * transaction that rolls back wakes nothing); every worker subscribes and dispatches at once instead
 * of at its next poll. Wake-ups are coalesced at both ends: a process publishes once per turn of its
 * event loop whatever the number of commits in it, and a dispatcher woken any number of times while
 * it scans the outbox scans once more after, not once per wake-up (`DispatchSignal`).
 *
 * A wake-up can be lost (Redis down or reconnecting, the process gone between COMMIT and PUBLISH, a
 * commit whose answer was lost, a row written by hand): the worker still polls, every
 * DISPATCH_INTERVAL_MS (scripts/worker.ts), and dispatches when its subscription (re)connects.
 */
import { Redis } from 'ioredis';
import { config } from '../config';
import { redis } from '../redis';

export const MAIL_WAKE_CHANNEL = 'crosstally:mail:wake';

let publishing = false;

/** Tell the dispatchers that committed outbox rows wait. Fire and forget: the worker's poll covers a lost one. */
export function wakeDispatcher(): void {
	if (publishing) return; // one PUBLISH for every commit that ends in this turn of the event loop
	publishing = true;
	setImmediate(() => {
		publishing = false;
		redis()
			.publish(MAIL_WAKE_CHANNEL, '1')
			.catch(() => undefined);
	});
}

/**
 * Wake-ups for one dispatch loop. `wake()` any number of times, from anywhere; `wait(ms)` resolves at
 * once if a wake-up came since the previous `wait` returned (one, whatever their number), else at the
 * next wake-up or after `ms`. The loop calls `wait` before each scan, so a wake-up that arrives during a
 * scan (a row committed after the scan read the outbox) is answered by exactly one more scan.
 */
export class DispatchSignal {
	private woken = false;
	private release: (() => void) | null = null;
	/** How many wake-ups came, and how many waits they ended (for the worker's log). */
	wakeups = 0;

	wake(): void {
		this.wakeups++;
		this.woken = true;
		const r = this.release;
		this.release = null;
		r?.();
	}

	/**
	 * Resolves true when woken, false when `ms` passed. The wake-ups are cleared just before the caller
	 * resumes (so before its scan reads the outbox): those that came until then are answered by that scan.
	 */
	async wait(ms: number): Promise<boolean> {
		const woken =
			this.woken ||
			(await new Promise<boolean>((resolve) => {
				const timer = setTimeout(() => {
					this.release = null;
					resolve(false);
				}, ms);
				this.release = () => {
					clearTimeout(timer);
					resolve(true);
				};
			}));
		this.woken = false;
		return woken;
	}
}

/**
 * Subscribe to the wake-ups (a connection of its own: a subscribed Redis connection takes no other
 * command). Every (re)connection wakes too: what was published while it was away is not replayed.
 */
export function subscribeToWakeups(onWake: () => void): { close: () => void } {
	const sub = new Redis(config.redisUrl, { maxRetriesPerRequest: null });
	sub.on('error', () => undefined); // the poll carries on; the dispatch loop reports Redis errors
	sub.on('message', (channel: string) => {
		if (channel === MAIL_WAKE_CHANNEL) onWake();
	});
	sub.on('ready', () => onWake());
	sub.subscribe(MAIL_WAKE_CHANNEL).catch(() => undefined);
	return { close: () => sub.disconnect() };
}
