/**
 * Activation: the output channel, the engine process client, the commands, the `.onnx` summary
 * editor and the panels. Models are loaded only in trusted workspaces (package.json declares
 * limited support for untrusted ones).
 */
import * as path from 'node:path';
import { promises as fsp } from 'node:fs';
import * as vscode from 'vscode';
import { EngineClient } from './engine-client';
import { isImagePath } from './images';
import { COMMANDS, MODEL_EDITOR_VIEW_TYPE } from './ids';
import { ModelSummaryEditor } from './model-editor';
import { ModelPairings, orderModelCandidates } from './pairing';
import { PanelHost } from './panel-host';
import { FactfoilSettings, SETTINGS_SECTION, defaultModelFor, resolveSettings, saveFolderFor } from './settings';

const IMAGE_FILTER = { Images: ['png', 'jpg', 'jpeg', 'webp', 'tif', 'tiff', 'gif', 'avif'] };

function settings(): FactfoilSettings {
  const c = vscode.workspace.getConfiguration(SETTINGS_SECTION);
  // Only what the user set (the defaults are DEFAULT_SETTINGS, equal to package.json's), so a
  // renamed setting's old id is read when the new one is unset.
  return resolveSettings((k) => { const i = c.inspect(k); return i?.workspaceFolderValue ?? i?.workspaceValue ?? i?.globalValue; });
}

function workspaceFolderOf(file: string): string | undefined {
  return vscode.workspace.getWorkspaceFolder(vscode.Uri.file(file))?.uri.fsPath;
}

/** The image shown in the active editor tab (VS Code's image preview is a custom editor). */
function activeImage(): string | undefined {
  const input = vscode.window.tabGroups.activeTabGroup.activeTab?.input;
  const uri = input instanceof vscode.TabInputCustom || input instanceof vscode.TabInputText ? input.uri : vscode.window.activeTextEditor?.document.uri;
  return uri?.scheme === 'file' && isImagePath(uri.fsPath) ? uri.fsPath : undefined;
}

async function exists(file: string): Promise<boolean> {
  try { await fsp.access(file); return true; } catch { return false; }
}

/** Workspaces may run our native engine on their files only once trusted. */
async function requireTrust(): Promise<boolean> {
  if (vscode.workspace.isTrusted) return true;
  const choice = await vscode.window.showWarningMessage('Factfoil loads and runs models only in trusted workspaces.', 'Manage Workspace Trust');
  if (choice) void vscode.commands.executeCommand('workbench.trust.manage');
  return false;
}

export function activate(context: vscode.ExtensionContext): void {
  const output = vscode.window.createOutputChannel('Factfoil', { log: true });
  const log = { info: (m: string) => output.info(m), warn: (m: string) => output.warn(m), error: (m: string) => output.error(m) };
  const pairings = new ModelPairings(context.workspaceState);
  let panels: PanelHost | undefined;
  const engine = new EngineClient({
    script: context.asAbsolutePath(path.join('dist', 'engine-process.js')),
    log,
    threads: () => settings().threads,
    onExit: (exit) => {
      panels?.engineStopped(exit.message, exit.hint);
      void vscode.window.showWarningMessage(`${exit.message} ${exit.hint}`, 'Show Log').then((c) => { if (c) output.show(true); });
    },
  });
  panels = new PanelHost({
    extensionUri: context.extensionUri, engine, log, settings,
    saveFolder: (image) => saveFolderFor(image, settings(), workspaceFolderOf(image)),
  });
  // Remembered only once the model has loaded on the image: a model that fails is never "used last".
  const explain = (model: string, image: string) => {
    panels!.show(model, image, (ok) => {
      void (ok ? pairings.remember(image, model) : pairings.forget(image, model));
    });
  };

  /** Which model explains this image: the configured default for its folder, else the user's pick. */
  async function chooseModel(image: string): Promise<string | undefined> {
    const configured = defaultModelFor(image, settings(), workspaceFolderOf(image));
    if (configured && (await exists(configured))) return configured;
    if (configured) log.warn(`factfoil.defaultModels names ${configured} for ${path.dirname(image)}, which does not exist; asking instead`);
    // Asked once per image folder (README): the folder's remembered model is used without asking.
    const paired = pairings.modelFor(image);
    if (paired && (await exists(paired))) {
      log.info(`explain ${image}: using ${paired}, remembered for this folder (Factfoil: Forget Model Choices for This Workspace asks again)`);
      return paired;
    }
    // The pick shows at once, busy, while the workspace is searched (large workspaces take a while).
    type Item = vscode.QuickPickItem & { path?: string };
    const qp = vscode.window.createQuickPick<Item>();
    qp.title = `Which model should explain ${path.basename(image)}?`;
    qp.placeholder = 'Looking for .onnx files in the workspace…';
    qp.matchOnDescription = true;
    qp.ignoreFocusOut = true;
    qp.busy = true;
    const browse: Item = { label: 'Browse…', description: 'choose a .onnx file outside the workspace', alwaysShow: true };
    qp.items = [browse];
    const chosen = new Promise<Item | undefined>((resolve) => {
      qp.onDidAccept(() => resolve(qp.selectedItems[0]));
      qp.onDidHide(() => resolve(undefined));
    });
    qp.show();
    const started = Date.now();
    void (async () => {
      const files = await vscode.workspace.findFiles('**/*.onnx', '**/{node_modules,.git}/**', 1000);
      const candidates = (await Promise.all(files.map(async (u) => {
        try { return { path: u.fsPath, mtimeMs: (await fsp.stat(u.fsPath)).mtimeMs }; } catch { return undefined; }
      }))).filter((c): c is { path: string; mtimeMs: number } => !!c);
      log.info(`found ${candidates.length} .onnx file(s) in the workspace in ${Date.now() - started} ms`);
      const root = workspaceFolderOf(image) ?? vscode.workspace.workspaceFolders?.[0]?.uri.fsPath;
      qp.items = [...orderModelCandidates(candidates, { paired: pairings.modelFor(image), recent: pairings.recent(), root }), browse];
      qp.placeholder = candidates.length ? 'Type to filter the workspace models (most recently used first)' : 'No .onnx files in the workspace: browse for one';
      qp.busy = false;
    })().catch((e) => { log.error(`looking for models failed: ${(e as Error).stack ?? e}`); qp.busy = false; });
    const picked = await chosen;
    qp.dispose();
    if (!picked) return undefined;
    if (picked.path) return picked.path;
    const browsed = await vscode.window.showOpenDialog({ canSelectMany: false, openLabel: 'Use this model', filters: { 'ONNX models': ['onnx'] } });
    return browsed?.[0]?.fsPath;
  }

  async function explainImage(uri?: vscode.Uri): Promise<void> {
    let image = uri?.scheme === 'file' ? uri.fsPath : activeImage();
    if (!image) {
      const picked = await vscode.window.showOpenDialog({ canSelectMany: false, openLabel: 'Explain', filters: IMAGE_FILTER });
      image = picked?.[0]?.fsPath;
    }
    if (!image) return;
    if (!isImagePath(image)) {
      void vscode.window.showWarningMessage(`Factfoil explains image files (PNG, JPEG, WebP, TIFF, GIF, AVIF); ${path.basename(image)} is not one.`);
      return;
    }
    if (!(await requireTrust())) return;
    log.info(`explain ${image}: choosing a model`);
    const model = await chooseModel(image);
    if (model) explain(model, image);
  }

  context.subscriptions.push(
    output,
    { dispose: () => { panels?.dispose(); void engine.dispose(); } },
    vscode.commands.registerCommand(COMMANDS.explainImage, (uri?: vscode.Uri) => explainImage(uri)),
    vscode.commands.registerCommand(COMMANDS.explainActiveImage, () => explainImage(undefined)),
    vscode.commands.registerCommand(COMMANDS.openModel, async (uri?: vscode.Uri) => {
      let target = uri;
      if (!target) {
        const picked = await vscode.window.showOpenDialog({ canSelectMany: false, openLabel: 'Open summary', filters: { 'ONNX models': ['onnx'] } });
        target = picked?.[0];
      }
      if (target) await vscode.commands.executeCommand('vscode.openWith', target, MODEL_EDITOR_VIEW_TYPE);
    }),
    vscode.commands.registerCommand(COMMANDS.showLog, () => output.show()),
    vscode.commands.registerCommand(COMMANDS.restartEngine, async () => {
      await engine.restart();
      panels?.engineStopped('The Factfoil engine was restarted; maps are computed again on the next request.');
      log.info('engine restarted on request');
    }),
    vscode.commands.registerCommand(COMMANDS.forgetModels, async () => {
      await pairings.forgetAll();
      void vscode.window.showInformationMessage('Factfoil forgot which models go with which image folders in this workspace.');
    }),
    vscode.window.registerCustomEditorProvider(MODEL_EDITOR_VIEW_TYPE, new ModelSummaryEditor(context.extensionUri, engine, log, (model, image) => {
      void requireTrust().then((ok) => { if (ok) explain(model, image); });
    }), { supportsMultipleEditorsPerDocument: true }),
    vscode.workspace.onDidChangeConfiguration((e) => {
      if (e.affectsConfiguration(`${SETTINGS_SECTION}.threads`) && engine.running) {
        if (engine.busy) log.info('factfoil.threads changed: applies when the engine next restarts');
        else void engine.restart().then(() => log.info('factfoil.threads changed: engine restarted'));
      }
    }),
  );
  log.info(`Factfoil activated (workspace ${vscode.workspace.isTrusted ? 'trusted' : 'in Restricted Mode: models are not loaded'})`);
}

export function deactivate(): void {
  // The subscriptions dispose the engine client, which stops the process.
}
