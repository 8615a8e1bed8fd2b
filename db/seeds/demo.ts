/**
 * Demo and test data beyond the accounts: the invented catalog for both, and for `demo` the
 * invented protocols (written elsewhere; skipped while that module does not exist yet).
 */
import { seedCatalog } from './catalog';
import { seedProfile } from './profile';

export async function seedDemo(which: 'demo' | 'test'): Promise<void> {
	await seedCatalog();
	await seedProfile();
	if (which === 'demo') {
		const m = await import('./protocols' as string).catch((e) => {
			if (String(e).includes('Cannot find module') || String(e).includes('ERR_MODULE_NOT_FOUND')) return null;
			throw e;
		});
		if (m) await m.seedProtocols();
	}
}
