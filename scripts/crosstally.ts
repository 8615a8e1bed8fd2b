/**
 * The Crosstally batch command: `npm run --silent crosstally -- <command> < input.json`.
 * Each command module exports `run(input, output, errors)` and resolves to the exit code.
 */
import type { Readable, Writable } from 'node:stream';

type Command = (input: Readable, output: Writable, errors: Writable) => Promise<number>;

const commands: Record<string, () => Promise<{ run: Command }>> = {
	reconcile: () => import('./cli/reconcile.ts'),
	agreement: () => import('./cli/agreement.ts'),
	kinds: () => import('./cli/kinds.ts')
};

async function main(): Promise<number> {
	const name = process.argv[2];
	const load = name ? commands[name] : undefined;
	if (!load) {
		process.stderr.write(`usage: npm run --silent crosstally -- <${Object.keys(commands).join('|')}> < input.json\n`);
		return 2;
	}
	const { run } = await load();
	return run(process.stdin, process.stdout, process.stderr);
}

main().then(
	(code) => {
		process.exitCode = code;
	},
	(err: unknown) => {
		process.stderr.write(`crosstally: ${err instanceof Error ? err.message : String(err)}\n`);
		process.exitCode = 1;
	}
);
