/**
 * Scanned record forms: PDF, PNG or JPEG, recognised by their first bytes (never by the name),
 * size-limited, stored under the data folder by a random name, with their SHA-256.
 */
import { createHash, randomUUID } from 'node:crypto';
import { chmod, mkdir, writeFile, readFile, unlink } from 'node:fs/promises';
import { join } from 'node:path';
import { config } from '../config';
import { transaction } from '../db';
import { models } from '../models';
import { reading } from '../models/protocol';
import { recordEvent } from '../trail';
import { protocolFor, attachmentHidden, type Actor } from './service';
import { ServiceError, notFound } from '../errors';
import { cleanFilename } from '../filenames';

const TYPES: { mime: string; ext: string; test: (b: Uint8Array) => boolean }[] = [
	{ mime: 'application/pdf', ext: 'pdf', test: (b) => b.length > 5 && String.fromCharCode(...b.slice(0, 5)) === '%PDF-' },
	{ mime: 'image/png', ext: 'png', test: (b) => b.length > 8 && [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a].every((x, i) => b[i] === x) },
	{ mime: 'image/jpeg', ext: 'jpg', test: (b) => b.length > 3 && b[0] === 0xff && b[1] === 0xd8 && b[2] === 0xff }
];

export function sniffType(bytes: Uint8Array): { mime: string; ext: string } | null {
	const t = TYPES.find((x) => x.test(bytes));
	return t ? { mime: t.mime, ext: t.ext } : null;
}

/** A display name without any path, control, bidi or quoting characters (../filenames.ts). */
export function safeFilename(name: string, ext: string): string {
	return cleanFilename(name, `record-form.${ext}`);
}

const dir = () => join(config.dataDir, 'uploads');

export async function addAttachment(protocolId: number, user: Actor, file: File | null) {
	if (!file || typeof file === 'string') throw new ServiceError(400, 'Choose a file to upload.', 'file');
	if (file.size === 0) throw new ServiceError(400, 'The file is empty (0 bytes).', 'file');
	if (file.size > config.uploadMaxBytes) throw new ServiceError(413, `The file is larger than ${Math.round(config.uploadMaxBytes / 1024 / 1024)} MB.`, 'file');
	const bytes = new Uint8Array(await file.arrayBuffer());
	const type = sniffType(bytes);
	if (!type) throw new ServiceError(415, 'Only PDF, PNG and JPEG scans can be attached (checked by content, not by the name).', 'file');
	const sha256 = createHash('sha256').update(bytes).digest('hex');
	const storage = `${randomUUID()}.${type.ext}`;
	// Scans are health records: a folder only the service's user can open, files only it can read.
	await mkdir(dir(), { recursive: true, mode: 0o700 });
	await chmod(dir(), 0o700);
	await writeFile(join(dir(), storage), bytes, { flag: 'wx', mode: 0o600 });
	try {
		return await transaction(async (t) => {
			const { p } = await protocolFor(protocolId, user, t);
			if (p.status === 'verified') throw new ServiceError(409, 'A verified protocol is locked.', 'file', 'conflict');
			const filename = safeFilename(file.name, type.ext);
			const { id: insertId } = await models().Attachment.create(
				{ protocol_id: p.id, filename, mime: type.mime, size: bytes.length, sha256, storage_name: storage, uploaded_by: user.id },
				{ transaction: t }
			);
			await recordEvent(
				{
					actorId: user.id,
					entity: 'attachment',
					entityId: insertId,
					protocolId: p.id,
					action: 'upload',
					newValue: { filename, mime: type.mime, size: bytes.length, sha256 }
				},
				t
			);
			return { id: insertId, filename, mime: type.mime, size: bytes.length, sha256 };
		});
	} catch (e) {
		await unlink(join(dir(), storage)).catch(() => undefined);
		throw e;
	}
}

export async function readAttachment(protocolId: number, attachmentId: number, user: Actor) {
	const { p } = await protocolFor(protocolId, user);
	// through its own protocol only: an attachment of another protocol is not found
	const row = await reading(null, () =>
		models().Attachment.findOne({
			attributes: ['filename', 'mime', 'storage_name', 'sha256', 'uploaded_by'],
			where: { id: attachmentId, protocol_id: protocolId }
		})
	);
	// the blind rule: the other scorer's upload is not there for an assigned scorer until both passes are in
	if (!row || attachmentHidden(p, user, row.uploaded_by)) throw notFound('This attachment');
	const bytes = await readFile(join(dir(), row.storage_name));
	return {
		mime: row.mime,
		storage_name: row.storage_name,
		sha256: row.sha256,
		uploaded_by: row.uploaded_by,
		filename: cleanFilename(row.filename, 'record-form'),
		bytes
	};
}
