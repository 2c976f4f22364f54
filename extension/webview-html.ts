/**
 * HTML for the extension's webviews: a fresh nonce per load, a strict Content-Security-Policy
 * (scripts only by nonce, styles and images only from the extension's resources and data:,
 * nothing remote), and the panel bundle loaded through webview URIs. No vscode import.
 */
import { randomBytes } from 'node:crypto';

/** 128 random bits, base64url: unguessable, and safe inside an attribute and a CSP source. */
export function makeNonce(bytes: (n: number) => Buffer = randomBytes): string {
  return bytes(16).toString('base64url');
}

export function escapeHtml(s: string): string {
  return s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

/**
 * The policy of every Factfoil webview. `cspSource` is the webview's own resource origin
 * (webview.cspSource); inline styles are allowed only by nonce (the model summary has one sheet).
 */
export function webviewCsp(cspSource: string, nonce: string): string {
  return [
    "default-src 'none'",
    `img-src ${cspSource} data: blob:`,
    `style-src ${cspSource} 'nonce-${nonce}'`,
    `script-src 'nonce-${nonce}'`,
    `font-src ${cspSource}`,
    "connect-src 'none'",
    "frame-src 'none'",
    "form-action 'none'",
    "base-uri 'none'",
  ].join('; ');
}

export interface PanelPage {
  cspSource: string;
  nonce: string;
  /** asWebviewUri(dist/webview.js) and asWebviewUri(dist/panel.css), as strings. */
  scriptUri: string;
  styleUri: string;
  title: string;
}

/** The panel page: one mount point, the stylesheet and the bundle (webview/main.ts mounts into #factfoil). */
export function panelHtml(p: PanelPage): string {
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="${escapeHtml(webviewCsp(p.cspSource, p.nonce))}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escapeHtml(p.title)}</title>
<link rel="stylesheet" href="${escapeHtml(p.styleUri)}">
</head><body>
<div id="factfoil"></div>
<script nonce="${escapeHtml(p.nonce)}" src="${escapeHtml(p.scriptUri)}"></script>
</body></html>`;
}
