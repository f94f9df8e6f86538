/**
 * report.pdf in the app: the renderer's report HTML printed to PDF by Chromium in a hidden,
 * script-less window of its own in-memory session that can load nothing but that one page
 * (images only as data: URLs). The web host answers this channel with an error and the page
 * uses the browser's own print instead.
 */
import { randomUUID } from 'node:crypto';
import { BrowserWindow, session, type Session } from 'electron';
import type { BridgeReply } from '../webhost/backend.js';
import { securityHeaders } from '../webhost/securityHeaders.js';
import type { Log } from './security.js';

const PRINT_PARTITION = 'plateau-print';
const PRINT_SCHEME = 'app';
const PRINT_HOST = 'print';
/** The page prints with its own styles; nothing runs, nothing is fetched. */
export const PRINT_CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; font-src data:";

const pages = new Map<string, string>();
let printSession: Session | undefined;

function preparedSession(log: Log): Session {
  if (printSession) return printSession;
  const ses = session.fromPartition(PRINT_PARTITION, { cache: false });
  ses.setPermissionRequestHandler((_c, _p, callback) => callback(false));
  ses.setPermissionCheckHandler(() => false);
  ses.webRequest.onBeforeRequest((details, callback) => {
    const allowed = details.url.startsWith(`${PRINT_SCHEME}://${PRINT_HOST}/`) || details.url.startsWith('data:');
    if (!allowed) log(`print: blocked a request to ${details.url.slice(0, 200)}`);
    callback({ cancel: !allowed });
  });
  ses.protocol.handle(PRINT_SCHEME, (request) => {
    const id = new URL(request.url).pathname.slice(1);
    const html = pages.get(id);
    const headers = { ...securityHeaders(PRINT_CSP), 'Content-Type': 'text/html; charset=utf-8' };
    return html === undefined ? new Response('not found', { status: 404, headers }) : new Response(html, { status: 200, headers });
  });
  printSession = ses;
  return ses;
}

export async function printReportToPdf(payload: unknown, log: Log): Promise<BridgeReply> {
  const html = (payload as { html: string }).html; // checked by the protocol schema
  const id = randomUUID();
  pages.set(id, html);
  const window = new BrowserWindow({
    show: false,
    webPreferences: { session: preparedSession(log), javascript: false, sandbox: true, contextIsolation: true, nodeIntegration: false, webSecurity: true },
  });
  try {
    await window.loadURL(`${PRINT_SCHEME}://${PRINT_HOST}/${id}`);
    const pdf = await window.webContents.printToPDF({ printBackground: true, pageSize: 'A4', margins: { marginType: 'default' } });
    const stamp = new Date().toISOString().slice(0, 16).replace(/[:T]/g, '-');
    return { ok: true, value: { fileName: `plateau-report-${stamp}.pdf`, bytesBase64: Buffer.from(pdf).toString('base64') } };
  } catch (error) {
    return { ok: false, error: { kind: 'internal', message: `could not print the report to PDF: ${(error as Error).message}`, problems: [] } };
  } finally {
    pages.delete(id);
    window.destroy();
  }
}
