/**
 * zod errors as messages for the user, client-safe. Forms key messages by their top-level field
 * (zod's own `z.flattenError`); JSON bodies with nested arrays key them by dotted path
 * (`groups.0.sd`), which `flattenError` cannot express.
 */
import { z } from 'zod';

/** The first message per top-level field; messages not about a field are under `form`. */
export function fieldMessages(error: z.ZodError): Record<string, string> {
	const flat = z.flattenError(error);
	const out: Record<string, string> = {};
	for (const [key, messages] of Object.entries(flat.fieldErrors as Record<string, string[] | undefined>)) if (messages?.length) out[key] = messages[0];
	if (flat.formErrors.length) out.form ??= flat.formErrors[0];
	return out;
}

/** The first message per dotted path (`groups.0.sd`); messages about the whole body are under `form`. */
export function pathMessages(error: z.ZodError): Record<string, string> {
	const out: Record<string, string> = {};
	for (const i of error.issues) out[i.path.length ? i.path.map(String).join('.') : 'form'] ??= i.message;
	return out;
}

/** The first problem, for answers that name one field. */
export function firstIssue(error: z.ZodError): { field: string | undefined; message: string } {
	const i = error.issues[0];
	return { field: i?.path.length ? i.path.map(String).join('.') : undefined, message: i?.message ?? 'The request is not valid.' };
}
