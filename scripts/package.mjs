// Packs the extension for one or every desktop platform with @vscode/vsce:
//   npm run package                       linux-x64 (the machine this runs on)
//   npm run package -- --target win32-x64  one platform
//   npm run package -- --all               all five
// Each target gets a staging folder (.cache/package/<target>/) where npm installs the two
// native packages for that os/cpu from the registry; vsce packs it through a whitelist into
// dist-vsix/factfoil-<version>-<target>.vsix, and the archive is checked: every file the
// installed extension loads is there, nothing of another platform is, and every native
// binary's header names the target's machine.
import { execFileSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdirSync, readFileSync, renameSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { NATIVE_FILE, TARGETS, nativeHeader, unresolvedLibraries, zipEntries } from './platform-targets.mjs';

const partials = [];
function fail(message) {
  console.error(`package: ${message}`);
  for (const f of partials) rmSync(f, { force: true });
  process.exit(1);
}

function parseTargets(argv) {
  if (argv.includes('--all')) return Object.keys(TARGETS);
  const at = argv.indexOf('--target');
  if (at < 0) return ['linux-x64'];
  const list = (argv[at + 1] ?? '').split(',').filter(Boolean);
  const unknown = list.filter((t) => !TARGETS[t]);
  if (!list.length || unknown.length) {
    fail(`unknown target '${unknown.join(',') || '(none)'}': use one of ${Object.keys(TARGETS).join(', ')} or --all` +
      ' (onnxruntime-node 1.30 ships no darwin-x64 build, so there is no Intel Mac package)');
  }
  return list;
}

function run(command, args, cwd = '.') {
  try { execFileSync(command, args, { cwd, stdio: ['ignore', 'inherit', 'inherit'] }); } catch { fail(`${command} ${args.join(' ')} failed in ${cwd} (its output is above)`); }
}

const root = JSON.parse(readFileSync('package.json', 'utf8'));
const installed = (name) => JSON.parse(readFileSync(join('node_modules', name, 'package.json'), 'utf8')).version;

// The staging manifest: the extension's own, with only the packages the bundles load at run
// time (everything else is inside the esbuild bundles), pinned to the versions the tests ran.
function stagingManifest() {
  const { devDependencies, scripts, files, bin, ...manifest } = root;
  manifest.dependencies = { 'onnxruntime-node': installed('onnxruntime-node'), sharp: installed('sharp') };
  return manifest;
}

// What vsce may take from the staging folder (vsce always adds package.json and README.md).
function whitelist(t) {
  const ort = `node_modules/onnxruntime-node/bin/napi-v6/${t.os}/${t.cpu}`;
  return ['**',
    '!dist/extension.js', '!dist/engine-process.js', '!dist/webview.js', '!dist/panel.css', '!LICENSE',
    '!node_modules/onnxruntime-node/package.json', '!node_modules/onnxruntime-node/LICENSE*', '!node_modules/onnxruntime-node/dist/*.js',
    ...t.ortFiles.map((f) => `!${ort}/${f}`),
    '!node_modules/onnxruntime-common/package.json', '!node_modules/onnxruntime-common/LICENSE*',
    '!node_modules/onnxruntime-common/dist/cjs/**/*.js', '!node_modules/onnxruntime-common/dist/cjs/package.json',
    '!node_modules/sharp/package.json', '!node_modules/sharp/LICENSE', '!node_modules/sharp/lib/*.js',
    ...t.sharp.map((p) => `!node_modules/@img/${p}/**`),
    '!node_modules/@img/colour/package.json', '!node_modules/@img/colour/*.cjs', '!node_modules/@img/colour/LICENSE.md',
    '!node_modules/detect-libc/package.json', '!node_modules/detect-libc/LICENSE', '!node_modules/detect-libc/lib/**',
    '!node_modules/semver/package.json', '!node_modules/semver/LICENSE', '!node_modules/semver/**/*.js',
  ].join('\n') + '\n';
}

// The files the packed extension needs to start the engine on this target.
function requiredEntries(t) {
  const ort = `extension/node_modules/onnxruntime-node/bin/napi-v6/${t.os}/${t.cpu}`;
  return [
    'extension/package.json', 'extension/dist/extension.js', 'extension/dist/engine-process.js',
    'extension/dist/webview.js', 'extension/dist/panel.css',
    'extension/node_modules/onnxruntime-node/package.json', 'extension/node_modules/onnxruntime-node/dist/index.js',
    ...t.ortFiles.map((f) => `${ort}/${f}`),
    'extension/node_modules/onnxruntime-common/package.json', 'extension/node_modules/onnxruntime-common/dist/cjs/index.js',
    'extension/node_modules/sharp/package.json', 'extension/node_modules/sharp/lib/index.js',
    ...t.sharpRequired.map((f) => `extension/node_modules/@img/${f}`),
    'extension/node_modules/@img/colour/package.json', 'extension/node_modules/detect-libc/package.json',
    'extension/node_modules/semver/package.json',
  ];
}

// What must stay out: other platforms, GPU providers, sources, tests, dev tools.
function unwantedEntry(name, target) {
  const otherPlatform = Object.entries(TARGETS).some(([id, o]) => id !== target &&
    (name.includes(`/napi-v6/${o.os}/${o.cpu}/`) || o.sharp.some((p) => name.includes(`/@img/${p}/`))));
  return otherPlatform ||
    /\/napi-v6\/darwin\/x64\//.test(name) ||
    /providers_(cuda|tensorrt|rocm|migraphx)|DirectML\.dll|dxcompiler\.dll|dxil\.dll/i.test(name) ||
    /^extension\/(core|extension|webview|test|test-fixtures|scripts|\.cache|\.ci)\//.test(name) ||
    /\/node_modules\/(playwright-core|typescript|esbuild|@esbuild|mocha|tsx|@vscode|protobufjs|long|adm-zip|global-agent|ml-matrix)\//.test(name) ||
    /\.ts$|\.map$/.test(name);
}

function packTarget(target) {
  const t = TARGETS[target];
  // Per process: two packing runs at once (two engineers, or a test and a build) neither share
  // a staging folder nor leave a half-written .vsix where the other reads it; the archive is
  // written under a temporary name, checked, then renamed into place.
  const stage = resolve('.cache', 'package', `${target}-${process.pid}`);
  const out = resolve('dist-vsix', `${root.name}-${root.version}-${target}.vsix`);
  const partial = `${out}.${process.pid}.partial`;
  partials.push(partial);
  rmSync(stage, { recursive: true, force: true });
  mkdirSync(join(stage, 'dist'), { recursive: true });
  writeFileSync(join(stage, 'package.json'), JSON.stringify(stagingManifest(), null, 2) + '\n');
  // npm picks the optional @img packages of the target's os/cpu/libc; --ignore-scripts: the
  // binaries we ship are in the registry tarballs (onnxruntime-node's script would only fetch
  // CUDA providers from another host, sharp's only checks its prebuilt binary).
  run('npm', ['install', '--omit=dev', '--ignore-scripts', '--no-audit', '--no-fund', '--no-package-lock', '--loglevel=error',
    `--os=${t.os}`, `--cpu=${t.cpu}`, ...(t.libc ? [`--libc=${t.libc}`] : [])], stage);
  for (const f of ['dist/extension.js', 'dist/engine-process.js', 'dist/webview.js', 'dist/panel.css', 'README.md', 'LICENSE']) {
    copyFileSync(f, join(stage, f));
  }
  writeFileSync(join(stage, '.vscodeignore'), whitelist(t));
  mkdirSync('dist-vsix', { recursive: true });
  // --allow-missing-repository: there is no public repository to link to.
  run(process.execPath, [resolve('node_modules/@vscode/vsce/vsce'), 'package', '--target', target, '--out', partial, '--allow-missing-repository'], stage);
  const result = checkPackage(partial, target, out);
  renameSync(partial, out);
  rmSync(stage, { recursive: true, force: true });
  return { ...result, file: out };
}

// Reads the packed archive back: required files, unwanted files, native headers.
function checkPackage(file, target, label = file) {
  const t = TARGETS[target];
  const entries = zipEntries(file);
  const names = entries.map((e) => e.name);
  const missing = requiredEntries(t).filter((n) => !names.includes(n));
  if (missing.length) fail(`${file} lacks files the extension needs at run time:\n  ${missing.join('\n  ')}`);
  const unwanted = names.filter((n) => unwantedEntry(n, target));
  if (unwanted.length) fail(`${file} carries files it should not:\n  ${unwanted.slice(0, 20).join('\n  ')}`);
  const natives = entries.filter((e) => NATIVE_FILE.test(e.name)).map((e) => ({ name: e.name, bytes: e.read() }));
  const headers = natives.map((e) => ({ name: e.name, header: nativeHeader(e.bytes) }));
  const wrong = headers.filter((h) => h.header !== t.machine);
  if (wrong.length) fail(`${file}: native binaries not built for ${t.machine}:\n  ${wrong.map((h) => `${h.name}: ${h.header}`).join('\n  ')}`);
  const { missing: unresolved, delayedAbsent } = unresolvedLibraries(natives, t.os);
  if (unresolved.length) fail(`${file}: native binaries need libraries that are neither packed nor part of ${t.os}:\n  ${unresolved.join('\n  ')}`);
  const bytes = statSync(file).size;
  const mib = (bytes / 2 ** 20).toFixed(1);
  console.log(`package: ${label}: ${mib} MiB, ${names.length} files, ${natives.length} native binaries, all ${t.machine}` +
    `, every imported library packed or part of ${t.os}` + (delayedAbsent.length ? ` (delay-loaded, not packed: ${delayedAbsent.join(', ')})` : ''));
  return { target, file, bytes, files: names.length, natives: headers, delayedAbsent };
}

const targets = parseTargets(process.argv.slice(2));
run(process.execPath, ['scripts/build.mjs']);
for (const bundle of ['dist/extension.js', 'dist/engine-process.js', 'dist/webview.js', 'dist/panel.css']) {
  if (!existsSync(bundle)) fail(`${bundle} was not built (is its entry point missing?)`);
}
const results = targets.map(packTarget);
if (process.argv.includes('--report')) {
  const report = process.argv[process.argv.indexOf('--report') + 1];
  writeFileSync(report, JSON.stringify(results, null, 2) + '\n');
}
