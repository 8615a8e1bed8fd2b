import type { QueryInterface } from 'sequelize';
export type Migration = (params: { name: string; context: QueryInterface }) => Promise<void>;
