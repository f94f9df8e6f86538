/** Opens a URL in the system browser; failures are reported, never thrown (the URL is printed anyway). */
import { spawn } from 'node:child_process';

export function openInBrowser(url: string, onFailure: (reason: string) => void): void {
  // Only our own loopback URL is ever opened; refuse anything else rather than hand it to a shell.
  if (!/^http:\/\/127\.0\.0\.1:\d+\/\?token=[A-Za-z0-9_-]+$/.test(url)) {
    onFailure('not a Plateau loopback URL');
    return;
  }
  const [command, args] =
    process.platform === 'win32'
      ? ['rundll32', ['url.dll,FileProtocolHandler', url]]
      : process.platform === 'darwin'
        ? ['open', [url]]
        : ['xdg-open', [url]];
  try {
    const child = spawn(command, args, { detached: true, stdio: 'ignore' });
    child.on('error', (error) => onFailure(`${command}: ${error.message}`));
    child.unref();
  } catch (error) {
    onFailure(`${command}: ${(error as Error).message}`);
  }
}
