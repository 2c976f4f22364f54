// Bundles the CLI, the engine process, the extension and the webview with esbuild.
// Native packages stay external: they ship their own binaries.
import { build } from 'esbuild';
import { existsSync, chmodSync } from 'node:fs';
import { copyFileSync, mkdirSync } from 'node:fs';

const external = ['onnxruntime-node', 'sharp', 'vscode', 'playwright-core'];
const node = { bundle: true, platform: 'node', target: 'node20', format: 'cjs', sourcemap: true, external, logLevel: 'warning' };
const entries = [
  { entryPoints: ['core/cli/main.ts'], outfile: 'dist/cli.js', banner: { js: '#!/usr/bin/env node' } },
  { entryPoints: ['core/engine-process/main.ts'], outfile: 'dist/engine-process.js' },
  { entryPoints: ['extension/extension.ts'], outfile: 'dist/extension.js' },
];
await Promise.all(entries.filter((e) => existsSync(e.entryPoints[0])).map((e) => build({ ...node, ...e })));
if (existsSync('webview/main.ts')) {
  await build({ entryPoints: ['webview/main.ts'], outfile: 'dist/webview.js', bundle: true, platform: 'browser', target: 'es2022', format: 'iife', sourcemap: true, logLevel: 'warning' });
}
// The panel's stylesheet ships beside its script (the webview loads both from dist/).
if (existsSync('webview/panel.css')) { mkdirSync('dist', { recursive: true }); copyFileSync('webview/panel.css', 'dist/panel.css'); }
if (existsSync('dist/cli.js')) chmodSync('dist/cli.js', 0o755);
