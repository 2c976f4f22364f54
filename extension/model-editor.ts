/**
 * The read-only custom editor for `.onnx` files, their default editor (a click on one in the
 * Explorer shows the summary, not the binary as text):
 * the model summary from the engine, and a way to pick or drop an image to explain with it.
 */
import * as path from 'node:path';
import * as vscode from 'vscode';
import type { EngineClient, EngineRequestError } from './engine-client';
import { isImagePath } from './images';
import { EditorState, checkEditorMessage, modelSummaryHtml } from './model-summary-html';
import type { RelayLog } from './panel-relay';
import { makeNonce } from './webview-html';
import { sidecarPath } from '../core/io/sidecar';

export class ModelSummaryEditor implements vscode.CustomReadonlyEditorProvider {
  constructor(
    private readonly extensionUri: vscode.Uri,
    private readonly engine: EngineClient,
    private readonly log: RelayLog,
    private readonly explain: (model: string, image: string) => void,
  ) {}

  openCustomDocument(uri: vscode.Uri): vscode.CustomDocument {
    return { uri, dispose: () => undefined };
  }

  async resolveCustomEditor(doc: vscode.CustomDocument, panel: vscode.WebviewPanel): Promise<void> {
    const model = doc.uri.fsPath;
    const webview = panel.webview;
    webview.options = { enableScripts: true, enableForms: false, localResourceRoots: [vscode.Uri.joinPath(this.extensionUri, 'dist')] };
    // A closed editor's webview throws on every use: nothing renders into it once it is gone
    // (a summary still loading when the tab closed logged "Webview is disposed" with a stack).
    let disposed = false;
    const render = (state: EditorState) => {
      if (!disposed) webview.html = modelSummaryHtml(state, { cspSource: webview.cspSource, nonce: makeNonce() });
    };
    let loading = 0;
    const load = async () => {
      if (!vscode.workspace.isTrusted) { render({ kind: 'untrusted' }); return; }
      const mine = ++loading;
      render({ kind: 'loading' });
      let summary;
      try {
        summary = await this.engine.request({ op: 'openModel', model }).result;
      } catch (e) {
        const err = e as EngineRequestError;
        if (disposed) return;
        if (err?.kind === 'internal' || err?.kind === undefined) this.log.error(`model summary of ${model} failed: ${err?.stack ?? e}`);
        if (mine === loading) render({ kind: 'failed', message: String(err?.message ?? e), ...(err?.hint ? { hint: err.hint } : {}) });
        return;
      }
      if (mine === loading) render({ kind: 'ready', summary });
    };
    const subs: vscode.Disposable[] = [];
    // The model or its settings file changed on disk: show the new summary.
    const watcher = vscode.workspace.createFileSystemWatcher(new vscode.RelativePattern(vscode.Uri.file(path.dirname(model)), `{${path.basename(model)},${path.basename(sidecarPath(model))}}`));
    subs.push(watcher, watcher.onDidChange(() => void load()), watcher.onDidCreate(() => void load()), watcher.onDidDelete(() => void load()));
    subs.push(vscode.workspace.onDidGrantWorkspaceTrust(() => void load()));
    subs.push(webview.onDidReceiveMessage(async (raw) => {
      const m = checkEditorMessage(raw);
      if (!m) { this.log.warn(`dropped a malformed message from the model summary: ${JSON.stringify(raw)?.slice(0, 200)}`); return; }
      if (m.type === 'trustWorkspace') { void vscode.commands.executeCommand('workbench.trust.manage'); return; }
      if (m.type === 'pickImage') {
        const picked = await vscode.window.showOpenDialog({
          defaultUri: vscode.Uri.file(path.dirname(model)), canSelectMany: false, openLabel: 'Explain',
          filters: { Images: ['png', 'jpg', 'jpeg', 'webp', 'tif', 'tiff', 'gif', 'avif'] },
        });
        if (picked?.[0]) this.explain(model, picked[0].fsPath);
        return;
      }
      let uri: vscode.Uri;
      try { uri = vscode.Uri.parse(m.uri, true); } catch { uri = vscode.Uri.file(m.uri); }
      if (uri.scheme !== 'file' || !isImagePath(uri.fsPath)) {
        void vscode.window.showWarningMessage(`Factfoil explains image files (PNG, JPEG, WebP, TIFF, GIF, AVIF); ${path.basename(uri.path) || m.uri} is not one.`);
        return;
      }
      this.explain(model, uri.fsPath);
    }));
    panel.onDidDispose(() => { disposed = true; subs.forEach((s) => s.dispose()); });
    await load();
  }
}
