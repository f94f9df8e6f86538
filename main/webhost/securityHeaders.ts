/**
 * The Content-Security-Policy and the other response headers shared by both hosts (web host and
 * Electron). One place, so the two cannot drift. The renderer is a bundled app: scripts, styles,
 * fonts and workers come only from the app itself, nothing remote, no eval, no plugins, no
 * framing; images may be data:/blob: URLs (chart export). The only connection is the bridge.
 */

export interface CspOptions {
  /** WebSocket origins the renderer may connect to (web host: ws://127.0.0.1:<port>); none in Electron. */
  connectSources?: readonly string[];
}

export function contentSecurityPolicy(options: CspOptions = {}): string {
  const connect = options.connectSources && options.connectSources.length > 0 ? options.connectSources.join(' ') : "'none'";
  return [
    "default-src 'self'",
    "script-src 'self'",
    // Inline style attributes (set by the UI framework and the chart library) are allowed;
    // style sheets still come only from the app.
    "style-src 'self'",
    "style-src-attr 'unsafe-inline'",
    "img-src 'self' data: blob:",
    "font-src 'self'",
    "worker-src 'self'",
    `connect-src ${connect}`,
    "object-src 'none'",
    "base-uri 'none'",
    "form-action 'none'",
    "frame-src 'none'",
    "frame-ancestors 'none'",
  ].join('; ');
}

/** Headers sent with every response of the web host (and set on the app protocol in Electron). */
export function securityHeaders(csp: string): Record<string, string> {
  return {
    'Content-Security-Policy': csp,
    'X-Content-Type-Options': 'nosniff',
    'X-Frame-Options': 'DENY',
    'Referrer-Policy': 'no-referrer',
    'Cross-Origin-Opener-Policy': 'same-origin',
    'Cross-Origin-Resource-Policy': 'same-origin',
    'Permissions-Policy': 'camera=(), microphone=(), geolocation=(), usb=(), serial=(), bluetooth=(), payment=()',
  };
}
