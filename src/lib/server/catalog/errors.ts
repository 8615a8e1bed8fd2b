/** Refusals of the catalog services: a status, a message, and messages per field. */
export class CatalogError extends Error {
	constructor(
		public status: 400 | 404 | 409 | 413 | 422,
		message: string,
		public fields: Record<string, string> = {},
		public code = 'invalid',
		/** Extra body for the API answer (e.g. the import preview with its row messages). */
		public detail?: Record<string, unknown>
	) {
		super(message);
	}
}

export const notFoundError = (what: string) => new CatalogError(404, `${what} does not exist.`, {}, 'not_found');
