import { z } from 'zod';
import { ROLES } from '../roles';
import { emailField } from './auth';

export const rolesField = z.array(z.enum(ROLES)).min(1, 'Choose at least one role');

export const inviteSchema = z.object({
	email: emailField,
	name: z.string().trim().min(2, 'Enter the person’s name').max(120),
	roles: rolesField
});

export const rolesSchema = z.object({ id: z.coerce.number().int().positive(), roles: rolesField });
export const activeSchema = z.object({ id: z.coerce.number().int().positive(), active: z.enum(['0', '1']) });
