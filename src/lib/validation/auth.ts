import { z } from 'zod';

export const emailField = z
	.string()
	.trim()
	.toLowerCase()
	.pipe(z.email({ message: 'Enter a valid e-mail address' }))
	.pipe(z.string().max(254));

export const signInSchema = z.object({
	email: emailField,
	password: z.string().min(1, 'Enter your password').max(200)
});

export const passwordSchema = z
	.object({
		password: z.string().min(12, 'Use at least 12 characters').max(200, 'At most 200 characters'),
		confirm: z.string()
	})
	.refine((v) => v.password === v.confirm, { message: 'The two passwords differ', path: ['confirm'] });
