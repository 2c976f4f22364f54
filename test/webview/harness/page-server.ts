/**
 * Serves the test page with the real bundle (dist/webview.js, dist/panel.css) under a strict
 * Content-Security-Policy like a VS Code webview's: scripts only by nonce, styles only from files,
 * images only from data:, nothing remote. The page is sandboxed as VS Code sandboxes its webview
 * iframe when enableForms is off (scripts and same-origin allowed, forms not), so a control that
 * relies on form submission fails here as it does in the editor.
 */
import { createServer, Server } from 'node:http';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { AddressInfo } from 'node:net';

const ROOT = join(__dirname, '..', '..', '..');
const NONCE = 'ffTestNonce4711';
export const CSP = `default-src 'none'; img-src data: blob:; style-src 'self'; script-src 'nonce-${NONCE}'; connect-src 'none'; font-src 'none'; form-action 'none'; sandbox allow-scripts allow-same-origin allow-pointer-lock allow-downloads`;

const FILES: Record<string, [string, string]> = {
  '/dist/webview.js': [join(ROOT, 'dist', 'webview.js'), 'text/javascript'],
  '/dist/panel.css': [join(ROOT, 'dist', 'panel.css'), 'text/css'],
  '/harness/themes.css': [join(__dirname, 'themes.css'), 'text/css'],
};

export type ThemeKind = 'vscode-light' | 'vscode-dark' | 'vscode-high-contrast' | 'none';

function page(theme: ThemeKind): string {
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Factfoil</title>
<link rel="stylesheet" href="/harness/themes.css">
<link rel="stylesheet" href="/dist/panel.css">
</head><body class="${theme === 'none' ? '' : theme}">
<div id="factfoil"></div>
<script nonce="${NONCE}" src="/dist/webview.js"></script>
</body></html>`;
}

export async function startPageServer(): Promise<{ url: (theme: ThemeKind) => string; close: () => Promise<void> }> {
  const server: Server = createServer((req, res) => {
    const u = new URL(req.url ?? '/', 'http://x');
    const file = FILES[u.pathname];
    if (u.pathname === '/') {
      res.writeHead(200, { 'content-type': 'text/html; charset=utf-8', 'content-security-policy': CSP });
      res.end(page((u.searchParams.get('theme') as ThemeKind) ?? 'vscode-light'));
    } else if (file) {
      res.writeHead(200, { 'content-type': file[1] });
      res.end(readFileSync(file[0]));
    } else {
      res.writeHead(404);
      res.end();
    }
  });
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
  const port = (server.address() as AddressInfo).port;
  return {
    url: (theme) => `http://127.0.0.1:${port}/?theme=${theme}`,
    close: () => new Promise((r) => server.close(() => r())),
  };
}
