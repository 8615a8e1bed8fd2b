/** The catalog services: tests (versioned), batteries, norm sets and groups, CSV import/export. */
export { ServiceError, notFoundError } from '../errors';
export * from './tests';
export * from './batteries';
export * from './norms';
export * from './io';
export * from './views';
