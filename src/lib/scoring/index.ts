/** Public API of the scoring engine (pure TypeScript, browser-safe). */
export * from './scales';
export * from './labels';
export * from './age';
export * from './reliability';
export * from './kinds';
export * from './digits';
export { charDiff, type DiffSegment } from './diff';
export {
	reconcile,
	testReferences,
	checkField,
	checkCompositeSum,
	classify,
	compositeReferences,
	compositeSpan,
	type Judgement,
	classifyPair,
	ReconcileInputError,
	type Discrepancy,
	type TestDiscrepancy,
	type CompositeDiscrepancy,
	type Reference,
	type FieldProblem,
	type FieldProblemCode,
	type FieldValues,
	type NormDef,
	type PassInput,
	type PassName,
	type ProtocolInput,
	type RawSpec,
	type ReconcileInput,
	type ReconcileResult,
	type TestDef
} from './reconcile';
export * from './norms';
export { canonicalBand, tablePercentileRef, testScorer, compositeScorer, regressionPredicted, type Scorer, type Point } from './forms';
export { parseReconcileInput, reconcileInputSchema, formatPath, type ParseResult } from './schema';
