import type { RequestHandler } from './$types';
import { json } from '@sveltejs/kit';

/** Liveness of this process only (no database call): used by scripts and as the benchmark floor. */
export const GET: RequestHandler = async () => json({ ok: true });
