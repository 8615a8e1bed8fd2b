/** The small part of jstat (1.9.x, CommonJS, no bundled types) that Crosstally uses. */
declare module 'jstat' {
	interface JStatNormal {
		/** Cumulative distribution function of N(mean, sd) at x. */
		cdf(x: number, mean: number, sd: number): number;
		/** Quantile (inverse CDF) of N(mean, sd) at probability p. */
		inv(p: number, mean: number, sd: number): number;
		pdf(x: number, mean: number, sd: number): number;
	}
	interface JStatStatic {
		normal: JStatNormal;
	}
	const jStat: JStatStatic;
	export default jStat;
}
