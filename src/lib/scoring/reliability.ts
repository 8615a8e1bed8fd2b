/**
 * Standard error of measurement and confidence intervals for a reported score.
 */
import { boundsFor, clamp, normalInv, roundHalfAway, roundTo, SCALES, type BoundsOverride } from './scales';

export type IntervalField = 'z' | 'standard' | 'scaled' | 't';

/** SEM = SD·√(1 − r), with SD the scale's SD (15 for standard scores, …) and r the reliability coefficient. */
export function sem(sd: number, reliability: number): number {
	if (!(reliability >= 0 && reliability <= 1)) throw new RangeError(`reliability must be within 0–1, got ${reliability}`);
	if (!(sd > 0)) throw new RangeError(`SD must be above 0, got ${sd}`);
	return sd * Math.sqrt(1 - reliability);
}

export interface ConfidenceInterval {
	level: number;
	sem: number;
	/** Critical value of the standard normal (1.645 for 90 %, 1.96 for 95 %). */
	critical: number;
	/** Unrounded ends, obtained score ± critical·SEM. */
	lowerExact: number;
	upperExact: number;
	/** Ends at the scale's precision, clamped to its bounds — what the summary prints. */
	lower: number;
	upper: number;
}

/**
 * Confidence interval around an obtained score on a scale: score ± z(1 − α/2)·SEM, centred on the
 * obtained score (the simple form most score summaries use; not the estimated true score).
 */
export function confidenceInterval(
	score: number,
	field: IntervalField,
	reliability: number,
	level: 0.9 | 0.95 | number = 0.95,
	bounds?: BoundsOverride | null
): ConfidenceInterval {
	if (!(level > 0 && level < 1)) throw new RangeError(`level must be between 0 and 1, got ${level}`);
	const scale = SCALES[field];
	const s = sem(scale.sd as number, reliability);
	const critical = normalInv(1 - (1 - level) / 2);
	const lowerExact = score - critical * s;
	const upperExact = score + critical * s;
	const b = boundsFor(field, bounds);
	const round = (x: number) => (scale.decimals === 0 ? roundHalfAway(x) : roundTo(x, scale.decimals));
	return {
		level,
		sem: s,
		critical,
		lowerExact,
		upperExact,
		lower: clamp(round(lowerExact), b),
		upper: clamp(round(upperExact), b)
	};
}
