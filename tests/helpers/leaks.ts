/** What must never reach a response body: a stack frame, a source path, SQL or a driver error code. */
export const LEAK =
	/\bat [\w.<>]+ \(|\.(ts|js):\d+:\d+|node_modules|\b(SELECT \S+ FROM|INSERT INTO|UPDATE \w+ SET|DELETE FROM)\b|Sequelize\w*Error|\bER_[A-Z_]{4,}/;
