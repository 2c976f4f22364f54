/** The webview pages' Content-Security-Policy, nonce and escaping. */
import { strict as assert } from 'node:assert';
import { escapeHtml, makeNonce, panelHtml, webviewCsp } from '../../extension/webview-html';

const SRC = 'https://file+.vscode-resource.vscode-cdn.net';

describe('webview html', () => {
  it('makes a fresh 128-bit nonce per page', () => {
    const a = makeNonce();
    const b = makeNonce();
    assert.notEqual(a, b);
    assert.match(a, /^[A-Za-z0-9_-]{22}$/);
  });

  it('allows scripts only by nonce, nothing remote, no inline styles without the nonce', () => {
    const csp = webviewCsp(SRC, 'N0nce');
    const d = Object.fromEntries(csp.split('; ').map((x) => { const [k, ...v] = x.split(' '); return [k, v]; }));
    assert.deepEqual(d['default-src'], ["'none'"]);
    assert.deepEqual(d['script-src'], ["'nonce-N0nce'"]);
    assert.deepEqual(d['style-src'], [SRC, "'nonce-N0nce'"]);
    assert.deepEqual(d['img-src'], [SRC, 'data:', 'blob:']);
    assert.deepEqual(d['connect-src'], ["'none'"]);
    assert.ok(!/unsafe|\*|http:/.test(csp), 'no unsafe-inline, unsafe-eval, wildcard or plain http');
  });

  it('loads the bundle and stylesheet from the given webview URIs under that policy', () => {
    const html = panelHtml({ cspSource: SRC, nonce: 'abc', scriptUri: `${SRC}/ext/dist/webview.js`, styleUri: `${SRC}/ext/dist/panel.css`, title: 'a "b" <c>' });
    assert.match(html, /<meta http-equiv="Content-Security-Policy" content="default-src &#39;none&#39;; [^"]*script-src &#39;nonce-abc&#39;/);
    assert.match(html, /<script nonce="abc" src="https:\/\/file\+\.vscode-resource\.vscode-cdn\.net\/ext\/dist\/webview\.js"><\/script>/);
    assert.match(html, /<link rel="stylesheet" href="[^"]+\/dist\/panel\.css">/);
    assert.match(html, /<div id="factfoil"><\/div>/);
    assert.match(html, /<title>a &quot;b&quot; &lt;c&gt;<\/title>/);
    assert.equal((html.match(/<script/g) ?? []).length, 1);
  });

  it('escapes the five HTML-significant characters', () => {
    assert.equal(escapeHtml(`<a href="x">'&'</a>`), '&lt;a href=&quot;x&quot;&gt;&#39;&amp;&#39;&lt;/a&gt;');
  });
});
