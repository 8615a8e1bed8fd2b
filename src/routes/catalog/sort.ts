/** Sorting and filtering for the catalog tables (client side; the lists are small). */
export type Sort = { key: string; dir: 1 | -1 };

export function sortRows<T>(rows: readonly T[], sort: Sort, get: (row: T, key: string) => string | number | null): T[] {
	return [...rows].sort((a, b) => {
		const x = get(a, sort.key);
		const y = get(b, sort.key);
		if (x === y) return 0;
		if (x === null) return 1;
		if (y === null) return -1;
		return (typeof x === 'number' && typeof y === 'number' ? x - y : String(x).localeCompare(String(y), 'en', { numeric: true })) * sort.dir;
	});
}

export function matches(q: string, ...fields: (string | number | null | undefined)[]): boolean {
	const s = q.trim().toLowerCase();
	return !s || fields.some((f) => f !== null && f !== undefined && String(f).toLowerCase().includes(s));
}
