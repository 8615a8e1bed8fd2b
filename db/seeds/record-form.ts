/** A small, valid PDF written by hand: the demo's "scanned" record forms (text only, invented). */
export function recordFormPdf(title: string, lines: string[]): Uint8Array {
	const esc = (s: string) => s.replace(/[\\()]/g, (c) => `\\${c}`).replace(/[^\x20-\x7e]/g, '-');
	const text = [
		'BT /F1 16 Tf 50 790 Td',
		`(${esc(title)}) Tj`,
		'/F1 10 Tf 0 -18 Td (Invented demo record form - not a real protocol) Tj',
		'/F1 11 Tf',
		...lines.map((l) => `0 -17 Td (${esc(l)}) Tj`),
		'ET'
	].join('\n');
	const objects = [
		'<< /Type /Catalog /Pages 2 0 R >>',
		'<< /Type /Pages /Kids [3 0 R] /Count 1 >>',
		'<< /Type /Page /Parent 2 0 R /MediaBox [0 0 595 842] /Resources << /Font << /F1 4 0 R >> >> /Contents 5 0 R >>',
		'<< /Type /Font /Subtype /Type1 /BaseFont /Helvetica >>',
		`<< /Length ${text.length} >>\nstream\n${text}\nendstream`
	];
	let out = '%PDF-1.4\n';
	const offsets: number[] = [];
	objects.forEach((o, i) => {
		offsets.push(out.length);
		out += `${i + 1} 0 obj\n${o}\nendobj\n`;
	});
	const xref = out.length;
	out += `xref\n0 ${objects.length + 1}\n0000000000 65535 f \n${offsets.map((o) => `${String(o).padStart(10, '0')} 00000 n \n`).join('')}`;
	out += `trailer\n<< /Size ${objects.length + 1} /Root 1 0 R >>\nstartxref\n${xref}\n%%EOF\n`;
	return new TextEncoder().encode(out);
}
