/**
 * CSV import and export of the catalog. The server re-parses and re-validates the file on
 * confirm (the browser's preview is a convenience, never trusted); then every row goes in one
 * transaction, or none does.
 */
import { transaction, type Tx } from '../db';
import { recordEvent } from '../trail';
import {
	normEquationsToCsv,
	normGroupsToCsv,
	normTablesToCsv,
	testsToCsv,
	type CsvKind,
	type PreviewResult,
	type SubjectSpan,
	type ValidationContext
} from '../../catalog/csv';
import { validateCsvText } from '../../catalog/parse';
import type { ImportConfirm, NormGroupInput, TestInput } from '../../catalog/schema';
import { ServiceError, notFoundError } from '../errors';
import { createTest, listTests, updateTest } from './tests';
import { createNormSet, getNormSet, listNormGroups, replaceNormGroups, subjectsOf } from './norms';
import { models } from '../models';

export async function validationContext(tx?: Tx): Promise<ValidationContext> {
	const { Composite, Test, Domain } = models();
	const transaction = tx ?? undefined;
	const [tests, domains, composites] = await Promise.all([
		Test.findAll({ attributes: ['code'], where: { is_current: true }, transaction }),
		Domain.findAll({ attributes: ['code'], order: [['position', 'ASC']], transaction }),
		Composite.findAll({ attributes: ['code'], transaction })
	]);
	const subjects = await subjectsOf([...tests.map((t) => t.code), ...composites.map((c) => c.code)], tx ?? null);
	const spans: Record<string, SubjectSpan> = Object.fromEntries(subjects);
	return { testCodes: new Set(tests.map((t) => t.code)), domains: new Set(domains.map((d) => d.code)), spans };
}

/** Parse and validate without writing anything. */
export async function previewImport(kind: CsvKind, csv: string): Promise<PreviewResult> {
	return validateCsvText(kind, csv, await validationContext()).result;
}

export interface ImportOutcome {
	kind: CsvKind;
	rows: number;
	normSetId?: number;
	created?: number;
	updated?: number;
	versioned?: number;
	unchanged?: number;
	removed?: number;
}

function refuse(result: PreviewResult): never {
	const first = result.fileErrors[0] ?? result.errors[0]?.message ?? 'The file has problems.';
	throw new ServiceError(
		422,
		result.fileErrors.length
			? first
			: `${result.errorCount} problem${result.errorCount === 1 ? '' : 's'} in ${result.badLines} row${result.badLines === 1 ? '' : 's'}; nothing was imported. First: line ${result.errors[0]?.line}: ${first}`,
		{ csv: first },
		'csv_invalid',
		{ preview: result }
	);
}

/** Import a validated file: everything in one transaction, or nothing. */
export async function confirmImport(req: ImportConfirm, actorId: number | null): Promise<ImportOutcome> {
	const { result, rows } = validateCsvText(req.kind, req.csv, await validationContext(), true);
	if (result.fileErrors.length || result.errorCount) refuse(result);
	if (req.kind === 'tests') {
		const tests = rows as (TestInput & { line: number })[];
		return transaction(async (tr) => {
			const out: ImportOutcome = { kind: 'tests', rows: tests.length, created: 0, updated: 0, versioned: 0, unchanged: 0 };
			const existing = new Set((await models().Test.findAll({ attributes: ['code'], transaction: tr })).map((r) => r.code));
			for (const { line, ...t } of tests) {
				try {
					if (existing.has(t.code)) {
						const r = await updateTest(t.code, t, actorId, tr);
						if (r.outcome === 'version') out.versioned!++;
						else if (r.outcome === 'updated') out.updated!++;
						else out.unchanged!++;
					} else {
						await createTest(t, actorId, tr);
						out.created!++;
					}
				} catch (e) {
					if (e instanceof ServiceError)
						throw new ServiceError(e.status === 404 ? 422 : e.status, `Line ${line}: ${e.message} Nothing was imported.`, e.fields, e.code);
					throw e;
				}
			}
			await recordEvent({ actorId, entity: 'catalog_import', entityId: 'tests', action: 'import', newValue: out }, tr);
			return out;
		});
	}
	const groups = rows as (NormGroupInput & { line: number })[];
	const what = req.kind === 'tables' ? 'table' : req.kind === 'equations' ? 'equation' : 'group';
	return transaction(async (tr) => {
		let setId: number;
		if (req.target.mode === 'new') setId = (await createNormSet(req.target.set, actorId, tr)).id;
		else {
			if (!(await getNormSet(req.target.id, tr))) throw notFoundError('This norm set');
			setId = req.target.id;
		}
		const r = await replaceNormGroups(
			setId,
			groups.map(({ line, ...g }) => ({ ...g, label: `Line ${line} (${what} ${g.group_code} of ${g.test_code})` })),
			tr
		);
		const out: ImportOutcome = {
			kind: req.kind,
			rows: req.kind === 'tables' ? groups.reduce((n, g) => n + (g.rows?.length ?? 0), 0) : groups.length,
			normSetId: setId,
			created: r.added,
			removed: r.removed
		};
		await recordEvent({ actorId, entity: 'catalog_import', entityId: setId, action: 'import', newValue: out }, tr);
		return out;
	});
}

export async function exportTestsCsv(): Promise<string> {
	return testsToCsv(await listTests());
}

export async function exportNormGroupsCsv(normSetId: number, kind: 'norms' | 'tables' | 'equations' = 'norms'): Promise<{ filename: string; csv: string }> {
	const set = await getNormSet(normSetId);
	if (!set) throw notFoundError('This norm set');
	const groups = await listNormGroups(normSetId);
	const csv = kind === 'tables' ? normTablesToCsv(groups) : kind === 'equations' ? normEquationsToCsv(groups) : normGroupsToCsv(groups);
	return { filename: `${set.code}-${set.version}-${kind}.csv`, csv };
}
