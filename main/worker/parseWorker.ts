/**
 * Worker process for parsing untrusted spreadsheets. Speaks ParseRequest / ParseResponse
 * (main/services/importProtocol.ts) over Node's IPC (child_process.fork) or Electron's
 * process.parentPort. The service enforces the time limit by killing this process.
 */
import { analyseWorkbook } from '../../engine/import/analyse.js';
import { WorkbookError } from '../../engine/import/workbook.js';
import { TemplateError } from '../../engine/import/roles.js';
import { validateParseRequest, type ParseResponse } from '../services/importProtocol.js';
import { debugDetail } from '../services/serviceError.js';
import { DEFAULT_MAX_FILE_BYTES, inspectZipContainer } from './limits.js';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

interface ElectronParentPort {
  on(event: 'message', listener: (e: { data: unknown }) => void): void;
  postMessage(message: unknown): void;
}

const parentPort = (process as unknown as { parentPort?: ElectronParentPort }).parentPort;

function send(message: ParseResponse): void {
  if (parentPort) parentPort.postMessage(message);
  else if (process.send) process.send(message);
}

export function handleParseMessage(raw: unknown): ParseResponse {
  const v = validateParseRequest(raw);
  if (!v.ok) return { type: 'error', id: v.id, kind: 'request', message: v.message };
  const req = v.request;
  try {
    if (req.bytes.length > DEFAULT_MAX_FILE_BYTES * 4)
      return { type: 'error', id: req.id, kind: 'workbook', message: `${req.fileName} is too large to parse` };
    let zipEntries: ((p: string) => Uint8Array | undefined) | undefined;
    if (req.bytes.length >= 4 && req.bytes[0] === 0x50 && req.bytes[1] === 0x4b) {
      const zip = inspectZipContainer(req.bytes);
      if (!zip.ok) return { type: 'error', id: req.id, kind: 'workbook', message: `${req.fileName} cannot be read: ${zip.reason}; save it again from the spreadsheet program` };
      zipEntries = (p) => zip.entries.get(p);
    }
    const analysis = analyseWorkbook(req.bytes, {
      mapping: req.mapping,
      options: req.options,
      ...(req.maxRows ? { maxRows: req.maxRows } : {}),
      ...(zipEntries ? { zipEntries } : {}),
      decodeUtf8: (b) => Buffer.from(b.buffer, b.byteOffset, b.length).toString('utf8'),
    });
    return { type: 'result', id: req.id, analysis };
  } catch (e) {
    if (e instanceof WorkbookError) return { type: 'error', id: req.id, kind: 'workbook', message: `${req.fileName}: ${e.message}` };
    if (e instanceof TemplateError) return { type: 'error', id: req.id, kind: 'template', message: e.message, problems: e.problems };
    // The exception's own text names code, not the file: shown only under PLATEAU_DEBUG=1.
    return { type: 'error', id: req.id, kind: 'internal', message: `${req.fileName} could not be read: its content is damaged or of a form Plateau does not read; save it again from the source system (as .xlsx or .csv)${debugDetail(e)}` };
  }
}

// Listen only when started as the worker (imported by a test runner that has IPC of its own, stay quiet).
const isEntry = process.argv[1] !== undefined && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url);
function handleTimed(raw: unknown): ParseResponse {
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  const r = handleParseMessage(raw);
  const cpu = process.cpuUsage(cpu0);
  return r.type === 'result' ? { ...r, timing: { cpuMs: (cpu.user + cpu.system) / 1000, wallMs: performance.now() - t0 } } : r;
}

if (parentPort) parentPort.on('message', (e) => send(handleTimed(e.data)));
else if (isEntry && process.send) {
  process.on('message', (m) => send(handleTimed(m)));
  // Die with the parent (issue 11: a killed `check` left its parse worker running).
  process.on('disconnect', () => process.exit(0));
}
