import { kindName } from '$lib/scoring/kinds';
/** Number formatting for the Audit screen (tabular figures are set in CSS). */
export const fmt = (v: unknown, decimals = 2): string => {
	if (v === null || v === undefined || v === '') return '—';
	const n = Number(v);
	if (!Number.isFinite(n)) return '—';
	return n.toLocaleString('en-GB', { minimumFractionDigits: decimals, maximumFractionDigits: decimals });
};
export const int = (v: unknown): string => fmt(v, 0);
/** A rate: "<0.01" rather than a misleading 0.00 when there were errors. */
export const rate = (v: unknown, decimals = 2): string => {
	const n = Number(v);
	if (v !== null && v !== undefined && Number.isFinite(n) && n > 0 && n < 10 ** -decimals / 2) return `<${(10 ** -decimals).toFixed(decimals)}`;
	return fmt(v, decimals);
};
export const signed = (v: unknown, decimals = 2): string => {
	const s = fmt(v, decimals);
	return s !== '—' && Number(v) > 0 ? `+${s}` : s.replace('-', '−');
};
/** The same words for a kind as on the Review screen. */
export const kindLabel = (k: string) => kindName(k);

/** Marker shapes and dash patterns per series, so lines differ by more than colour. */
export const SERIES_STYLES = [
	{ colour: '#1e5f74', dash: '', shape: 'circle' },
	{ colour: '#9a4a06', dash: '6 3', shape: 'square' },
	{ colour: '#2c6a3f', dash: '2 3', shape: 'triangle' },
	{ colour: '#6b4c8a', dash: '8 3 2 3', shape: 'diamond' },
	{ colour: '#a12f25', dash: '4 4', shape: 'cross' },
	{ colour: '#4a5563', dash: '1 2', shape: 'star' },
	{ colour: '#7a6a1e', dash: '10 4', shape: 'circle' }
] as const;

/** Score fields in words, and the unit of a difference on each. */
export const FIELD_NAMES: Record<string, string> = {
	raw: 'Raw score',
	z: 'z-score',
	standard: 'Standard score (100/15)',
	scaled: 'Scaled score (10/3)',
	t: 'T-score (50/10)',
	percentile: 'Percentile'
};
export const UNITS: Record<string, string> = {
	raw: 'raw-score units',
	z: 'z units',
	standard: 'standard-score points',
	scaled: 'scaled-score points',
	t: 'T-score points',
	percentile: 'percentile points'
};

/** The chip colours of an interpretation band (kappa or ICC). */
export const bandChip = (label: string | null) =>
	!label
		? 'border-line-strong text-ink-soft'
		: ['excellent', 'almost perfect', 'good', 'substantial'].includes(label)
			? 'border-verified-line bg-verified-soft text-verified'
			: ['moderate'].includes(label)
				? 'border-line-strong bg-paper-sunk text-ink'
				: 'border-attention-line bg-attention-soft text-attention';
