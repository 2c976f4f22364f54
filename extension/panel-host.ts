/**
 * Opens the Factfoil panel beside the editor for one (model, image) pair and wires its webview
 * to a PanelRelay. The webview runs scripts only by nonce, loads only the extension's dist/
 * and the image's folder, and has no remote content.
 */
import * as path from 'node:path';
import * as vscode from 'vscode';
import type { EngineClient } from './engine-client';
import { PANEL_VIEW_TYPE } from './ids';
import { delayedProgress, OpenNotification } from './delayed-progress';
import { PanelRelay, PanelUi, RelayLog } from './panel-relay';
import { FactfoilSettings } from './settings';
import { makeNonce, panelHtml } from './webview-html';

export interface PanelHostDeps {
  extensionUri: vscode.Uri;
  engine: EngineClient;
  log: RelayLog;
  settings(): FactfoilSettings;
  saveFolder(image: string): string | undefined;
}

/** A cancellable progress notification of the editor. */
const editorNotification: OpenNotification = (title, onCancel, run) => {
  void vscode.window.withProgress({ location: vscode.ProgressLocation.Notification, title, cancellable: true }, (progress, token) => {
    token.onCancellationRequested(onCancel);
    return run(progress);
  });
};

export function revealFile(file: string): void {
  const uri = vscode.Uri.file(file);
  const inWorkspace = !!vscode.workspace.getWorkspaceFolder(uri);
  void vscode.commands.executeCommand(inWorkspace ? 'revealInExplorer' : 'revealFileInOS', uri);
}

export class PanelHost {
  private readonly open = new Map<string, { panel: vscode.WebviewPanel; relay: PanelRelay }>();

  constructor(private readonly d: PanelHostDeps) {}

  /** Every open panel hears that the engine stopped. */
  engineStopped(message: string, hint?: string): void {
    for (const p of this.open.values()) p.relay.engineStopped(message, hint);
  }

  /** `opened` hears whether the model loaded on the image (the first time the panel asks). */
  show(model: string, image: string, opened?: (ok: boolean) => void): void {
    const key = `${path.resolve(model)}\n${path.resolve(image)}`;
    const existing = this.open.get(key);
    if (existing) { existing.panel.reveal(vscode.ViewColumn.Beside); return; }
    const dist = vscode.Uri.joinPath(this.d.extensionUri, 'dist');
    const panel = vscode.window.createWebviewPanel(PANEL_VIEW_TYPE, `${path.basename(image)} · Factfoil`, { viewColumn: vscode.ViewColumn.Beside, preserveFocus: false }, {
      enableScripts: true,
      enableForms: false,
      retainContextWhenHidden: true,
      localResourceRoots: [dist, vscode.Uri.file(path.dirname(path.resolve(image)))],
    });
    const webview = panel.webview;
    webview.html = panelHtml({
      cspSource: webview.cspSource, nonce: makeNonce(),
      scriptUri: webview.asWebviewUri(vscode.Uri.joinPath(dist, 'webview.js')).toString(),
      styleUri: webview.asWebviewUri(vscode.Uri.joinPath(dist, 'panel.css')).toString(),
      title: `Factfoil: ${path.basename(image)}`,
    });
    const ui: PanelUi = {
      startProgress: (title, onCancel) => delayedProgress(title, onCancel, () => panel.visible, editorNotification),
      saved: (files, message) => {
        void vscode.window.showInformationMessage(message, 'Reveal').then((choice) => { if (choice === 'Reveal' && files[0]) revealFile(files[0]); });
      },
      reveal: revealFile,
      pickLabelsFile: async (modelDir) => {
        const picked = await vscode.window.showOpenDialog({
          defaultUri: vscode.Uri.file(modelDir), canSelectMany: false, openLabel: 'Use these labels',
          filters: { 'Labels (one per line, or JSON)': ['txt', 'json', 'csv', 'names'], 'All files': ['*'] },
        });
        return picked?.[0]?.fsPath;
      },
      imageUri: (view) => (view.image.previewPng ? `data:image/png;base64,${view.image.previewPng}` : webview.asWebviewUri(vscode.Uri.file(view.image.path)).toString()),
    };
    const relay = new PanelRelay({
      engine: this.d.engine, target: { model, image }, ui, log: this.d.log,
      post: (m) => { void webview.postMessage(m); },
      settings: this.d.settings, saveFolder: this.d.saveFolder,
      ...(opened ? { opened } : {}),
    });
    const sub = webview.onDidReceiveMessage((m) => relay.receive(m));
    this.open.set(key, { panel, relay });
    panel.onDidDispose(() => {
      sub.dispose();
      relay.dispose();
      this.open.delete(key);
    });
  }

  dispose(): void {
    for (const p of [...this.open.values()]) p.panel.dispose();
  }
}
