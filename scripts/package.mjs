// Builds the bundles, then packs the extension for linux-x64 with @vscode/vsce into
// dist-vsix/factfoil-<version>-linux-x64.vsix, and checks what went in: every file the
// installed extension loads at run time must be there, and nothing heavy that it does not.
import { execFileSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';

const target = 'linux-x64';
const { name, version } = JSON.parse(readFileSync('package.json', 'utf8'));
const out = join('dist-vsix', `${name}-${version}-${target}.vsix`);

// What the packed extension needs to run (the extension forks the engine process, which
// loads both native packages from the extension's own node_modules).
const required = [
  'extension/package.json',
  'extension/dist/extension.js',
  'extension/dist/engine-process.js',
  'extension/dist/webview.js',
  'extension/dist/panel.css',
  'extension/node_modules/onnxruntime-node/package.json',
  'extension/node_modules/onnxruntime-node/dist/index.js',
  'extension/node_modules/onnxruntime-node/bin/napi-v6/linux/x64/onnxruntime_binding.node',
  'extension/node_modules/onnxruntime-node/bin/napi-v6/linux/x64/libonnxruntime.so.1',
  'extension/node_modules/onnxruntime-common/package.json',
  'extension/node_modules/onnxruntime-common/dist/cjs/index.js',
  'extension/node_modules/sharp/package.json',
  'extension/node_modules/sharp/lib/index.js',
  'extension/node_modules/@img/sharp-linux-x64/package.json',
  'extension/node_modules/@img/sharp-linux-x64/lib/sharp-linux-x64.node',
  'extension/node_modules/@img/sharp-libvips-linux-x64/package.json',
  'extension/node_modules/@img/colour/package.json',
  'extension/node_modules/detect-libc/package.json',
  'extension/node_modules/semver/package.json',
];
// What must stay out: other platforms, GPU providers, sources, tests, fixtures, dev tools.
const forbidden = [
  /\/(darwin|win32)\//, /\/linux\/arm64\//, /providers_(cuda|tensorrt|rocm|migraphx)/i,
  /^extension\/(core|extension|webview|test|test-fixtures|scripts|\.cache|\.ci)\//,
  /\/node_modules\/(playwright-core|typescript|esbuild|@esbuild|mocha|tsx|@vscode|protobufjs|long|adm-zip|global-agent)\//,
  /\.ts$/, /\.map$/,
];

function fail(message) {
  console.error(`package: ${message}`);
  process.exit(1);
}

// The file names of a zip archive, read from its central directory (PKWARE APPNOTE 4.3.12/4.3.16).
function zipEntryNames(file) {
  const zip = readFileSync(file);
  const eocd = zip.lastIndexOf(Buffer.from([0x50, 0x4b, 0x05, 0x06]));
  if (eocd < 0) fail(`${file} is not a zip archive`);
  const count = zip.readUInt16LE(eocd + 10);
  let at = zip.readUInt32LE(eocd + 16);
  const names = [];
  for (let i = 0; i < count; i++) {
    const nameLength = zip.readUInt16LE(at + 28), extraLength = zip.readUInt16LE(at + 30), commentLength = zip.readUInt16LE(at + 32);
    names.push(zip.toString('utf8', at + 46, at + 46 + nameLength));
    at += 46 + nameLength + extraLength + commentLength;
  }
  return names;
}

function run(args) {
  try { execFileSync(process.execPath, args, { stdio: 'inherit' }); } catch { fail(`${args.join(' ')} failed (its output is above)`); }
}

run(['scripts/build.mjs']);
for (const bundle of ['dist/extension.js', 'dist/engine-process.js', 'dist/webview.js']) {
  if (!existsSync(bundle)) fail(`${bundle} was not built (is its entry point missing?)`);
}
if (!existsSync('node_modules/onnxruntime-node/bin/napi-v6/linux/x64/onnxruntime_binding.node')) {
  fail('onnxruntime-node has no linux-x64 binary in node_modules: run npm ci');
}

mkdirSync('dist-vsix', { recursive: true });
// --allow-missing-repository: there is no public repository to link to.
const vsce = join('node_modules', '@vscode', 'vsce', 'vsce');
run([vsce, 'package', '--target', target, '--out', out, '--allow-missing-repository']);

const names = zipEntryNames(out);
const missing = required.filter((n) => !names.includes(n));
if (missing.length) fail(`${out} lacks files the extension needs at run time:\n  ${missing.join('\n  ')}`);
const unwanted = names.filter((n) => forbidden.some((re) => re.test(n)));
if (unwanted.length) fail(`${out} carries files it should not:\n  ${unwanted.slice(0, 20).join('\n  ')}`);
const megabytes = (statSync(out).size / 2 ** 20).toFixed(1);
console.log(`package: ${out}: ${megabytes} MiB, ${names.length} files`);
