/**
 * Host channels for files in the app: the native open dialog returns the chosen file's bytes
 * (the same shape the web renderer gets from its file input), the save dialog writes bytes the
 * renderer produced (the web renderer downloads them instead). Paths never reach the renderer.
 */
import { promises as fs } from 'node:fs';
import * as path from 'node:path';
import { dialog, type BrowserWindow } from 'electron';
import { z } from 'zod';
import { writeFileAtomic } from '../services/files.js';
import type { BridgeReply } from '../webhost/backend.js';
import type { HostHandler } from './ipc.js';

export const OPEN_FILE_CHANNEL = 'host.openFile';
export const SAVE_FILE_CHANNEL = 'host.saveFile';
/** The largest file the renderer may open (as the spreadsheet import's limit). */
export const MAX_OPEN_BYTES = 50 * 1024 * 1024;

const filterSchema = z.object({ name: z.string().max(100), extensions: z.array(z.string().regex(/^[A-Za-z0-9]{1,10}$/)).max(20) }).strict();
const openSchema = z.object({ title: z.string().max(200).optional(), filters: z.array(filterSchema).max(10).optional() }).strict();
const saveSchema = z
  .object({ fileName: z.string().min(1).max(200), bytesBase64: z.string().max(Math.ceil((MAX_OPEN_BYTES * 4) / 3) + 4).regex(/^[A-Za-z0-9+/]*={0,2}$/) })
  .strict();

function usage(message: string, problems: string[] = []): BridgeReply {
  return { ok: false, error: { kind: 'usage', message, problems } };
}

/** A suggested file name reduced to its last segment without control or reserved characters. */
export function safeFileName(name: string): string {
  const base = name.split(/[\\/]/).pop() ?? '';
  const cleaned = base.replace(/[\u0000-\u001f<>:"|?*]/g, '_').replace(/^\.+/, '').trim();
  return cleaned.length > 0 ? cleaned : 'plateau-export';
}

export function dialogHandlers(window: () => BrowserWindow | undefined): Map<string, HostHandler> {
  const handlers = new Map<string, HostHandler>();
  handlers.set(OPEN_FILE_CHANNEL, async (payload) => {
    const parsed = openSchema.safeParse(payload ?? {});
    if (!parsed.success) return usage('host.openFile: invalid options', parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`));
    const owner = window();
    const options = { title: parsed.data.title, properties: ['openFile' as const], filters: parsed.data.filters };
    const chosen = owner ? await dialog.showOpenDialog(owner, options) : await dialog.showOpenDialog(options);
    if (chosen.canceled || chosen.filePaths.length === 0) return { ok: true, value: null };
    const file = chosen.filePaths[0];
    const stat = await fs.stat(file);
    if (stat.size > MAX_OPEN_BYTES) {
      return { ok: false, error: { kind: 'file', message: `${path.basename(file)} is ${Math.round(stat.size / 1e6)} MB; the limit is ${MAX_OPEN_BYTES / 1e6} MB`, problems: [] } };
    }
    const bytes = await fs.readFile(file);
    return { ok: true, value: { fileName: path.basename(file), bytesBase64: bytes.toString('base64') } };
  });
  handlers.set(SAVE_FILE_CHANNEL, async (payload) => {
    const parsed = saveSchema.safeParse(payload);
    if (!parsed.success) return usage('host.saveFile: needs {fileName, bytesBase64}', parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`));
    const owner = window();
    const options = { defaultPath: safeFileName(parsed.data.fileName) };
    const chosen = owner ? await dialog.showSaveDialog(owner, options) : await dialog.showSaveDialog(options);
    if (chosen.canceled || !chosen.filePath) return { ok: true, value: { saved: false } };
    await writeFileAtomic(chosen.filePath, Buffer.from(parsed.data.bytesBase64, 'base64'));
    return { ok: true, value: { saved: true, fileName: path.basename(chosen.filePath) } };
  });
  return handlers;
}
