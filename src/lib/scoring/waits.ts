/**
 * What a discrepancy waits on before a reviewer can judge it (product.md, Review: evidence comes
 * before opinion). Pure and framework-free: the server uses it to refuse an early decision, the
 * Review screen to show "waits on the raw score".
 *
 * - A derived discrepancy of a test waits on that test's open raw-score discrepancy: once the raw
 *   score is settled, the derived values are judged again against the kept raw score's reference.
 * - A composite's discrepancy waits on every open discrepancy of its parts (`partsOf` gives the part
 *   tests of a composite id; composites are outside this module's knowledge).
 */

export interface WaitItem {
	id: number;
	/** The test's id (code), or null for a composite's discrepancy. */
	test: string | null;
	/** The composite's id for a composite's discrepancy. */
	composite?: string | null;
	field: string;
	open: boolean;
}

export function waitsOn<T extends WaitItem>(d: T, all: readonly T[], partsOf?: (composite: string) => readonly string[]): T[] {
	if (d.composite) {
		const parts = partsOf?.(d.composite) ?? [];
		return all.filter((x) => x.open && x.id !== d.id && !x.composite && x.test !== null && parts.includes(x.test));
	}
	if (d.field === 'raw' || d.test === null) return [];
	return all.filter((x) => x.open && x.id !== d.id && !x.composite && x.test === d.test && x.field === 'raw');
}
