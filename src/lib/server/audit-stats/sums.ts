/**
 * Agreement statistics from additive sums, so the daily summary rows can be added up in SQL and
 * the statistics follow exactly, without reading one row per pair. For n targets rated by k = 2
 * raters (first pass x, second pass y):
 *
 *   SST = Σx² + Σy² − (Σx + Σy)² / 2n
 *   SSW = Σ(x − y)² / 2                       (within targets)
 *   SSB = SST − SSW                           (between targets)
 *   SSJ = (Σx − Σy)² / 2n                     (between raters)
 *   SSE = SSW − SSJ                           (residual)
 *   BMS = SSB/(n − 1), WMS = SSW/n, JMS = SSJ, EMS = SSE/(n − 1)
 *
 * and the six Shrout & Fleiss (1979) forms exactly as `intraclassCorrelation` in
 * src/lib/scoring/agreement.ts computes them from the matrix (tests/integration/audit-stats.test.ts
 * checks the two agree on random data). Bland–Altman: bias = Σd/n, sd = √((Σd² − n·bias²)/(n − 1)).
 */
import { LIMITS_Z, iccFromMeanSquares, type IccForm } from '../../scoring/agreement';

export interface PairSums {
	pairs: number;
	sx: number;
	sy: number;
	sxx: number;
	syy: number;
	sxy: number;
	sd: number;
	sdd: number;
}

export const ZERO_SUMS: PairSums = { pairs: 0, sx: 0, sy: 0, sxx: 0, syy: 0, sxy: 0, sd: 0, sdd: 0 };

export function addSums(a: PairSums, b: Partial<PairSums>): PairSums {
	const n = (v: unknown) => Number(v ?? 0);
	return {
		pairs: a.pairs + n(b.pairs),
		sx: a.sx + n(b.sx),
		sy: a.sy + n(b.sy),
		sxx: a.sxx + n(b.sxx),
		syy: a.syy + n(b.syy),
		sxy: a.sxy + n(b.sxy),
		sd: a.sd + n(b.sd),
		sdd: a.sdd + n(b.sdd)
	};
}

/** Sums of a list of [x, y] pairs (for tests and small sets). */
export function sumsOf(pairs: ReadonlyArray<readonly [number, number]>): PairSums {
	let s = { ...ZERO_SUMS };
	for (const [x, y] of pairs) s = addSums(s, { pairs: 1, sx: x, sy: y, sxx: x * x, syy: y * y, sxy: x * y, sd: x - y, sdd: (x - y) ** 2 });
	return s;
}

export function iccFromSums(s: PairSums): { icc: Record<IccForm, number | null>; undefinedReason: string | null } | null {
	const n = s.pairs;
	const k = 2;
	if (n < 2) return null;
	const total = s.sx + s.sy;
	const sst = Math.max(0, s.sxx + s.syy - (total * total) / (2 * n));
	const ssw = Math.max(0, s.sdd / 2);
	const ssb = Math.max(0, sst - ssw);
	const ssj = (s.sd * s.sd) / (2 * n);
	const sse = Math.max(0, ssw - ssj);
	const bms = ssb / (n - 1);
	const wms = ssw / n;
	const jms = ssj;
	const ems = sse / (n - 1);
	const constant = sst <= 1e-12 * Math.max(1, s.sxx + s.syy);
	return iccFromMeanSquares({ bms, wms, jms, ems }, n, k, constant);
}

export function blandAltmanFromSums(s: PairSums): { bias: number; sd: number; lower: number; upper: number; n: number } | null {
	const n = s.pairs;
	if (n < 2) return null;
	const bias = s.sd / n;
	const sd = Math.sqrt(Math.max(0, (s.sdd - n * bias * bias) / (n - 1)));
	return { bias, sd, lower: bias - LIMITS_Z * sd, upper: bias + LIMITS_Z * sd, n };
}
