/** Errors the workflow raises on purpose: each has the HTTP status and a message for the user. */
export class WorkflowError extends Error {
	constructor(
		public status: 400 | 403 | 404 | 409 | 413 | 415 | 422,
		message: string,
		public field?: string,
		public code = 'workflow',
		/** Extra data for the form or API answer (e.g. the norm groups to choose from). */
		public detail?: Record<string, unknown>
	) {
		super(message);
	}
}

export const notFound = (what = 'This protocol') => new WorkflowError(404, `${what} does not exist or is not assigned to you.`, undefined, 'not_found');
export const conflict = (message: string) => new WorkflowError(409, message, undefined, 'conflict');
export const invalid = (message: string, field?: string) => new WorkflowError(400, message, field, 'invalid');
