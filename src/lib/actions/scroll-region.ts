/**
 * `use:scrollRegion={'Name'}` on a box with `overflow-x-auto` that holds a wide table: while the
 * table is wider than the box (so the box, not the page, scrolls sideways), the box is a named
 * region in the tab order, so a keyboard user can scroll it with the arrow keys; when everything
 * fits it is a plain box again (no useless tab stop).
 */
export function scrollRegion(box: HTMLElement, label: string) {
	let name = label;
	const check = () => {
		if (box.scrollWidth > box.clientWidth + 1) {
			box.setAttribute('role', 'region');
			box.setAttribute('aria-label', `${name} (scrolls sideways)`);
			box.tabIndex = 0;
		} else {
			box.removeAttribute('role');
			box.removeAttribute('aria-label');
			box.removeAttribute('tabindex');
		}
	};
	const ro = new ResizeObserver(check);
	ro.observe(box);
	for (const c of box.children) ro.observe(c);
	check();
	return {
		update(next: string) {
			name = next;
			check();
		},
		destroy() {
			ro.disconnect();
		}
	};
}
