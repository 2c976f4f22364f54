/**
 * The CLI as a user installs it into their own repository: `npm pack` of this project, then
 * `npm install <tarball>` into an empty project (network: the npm registry only), then
 * `npx factfoil predict` and `npx factfoil explain` on the demo model there. The install sets
 * ONNXRUNTIME_NODE_INSTALL=skip, as the README tells users to: onnxruntime-node's postinstall
 * would otherwise fetch CUDA provider files from a host other than the registry (linux-x64
 * only); the CPU binaries the CLI uses are in its npm tarball.
 * The installed CLI's answers are compared with the repository's own dist/cli.js.
 */
import { strict as assert } from 'node:assert';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';

const ROOT = path.resolve(__dirname, '..', '..');
const PARTS = path.join(ROOT, 'test-fixtures', 'parts');
const MODEL = path.join(PARTS, 'parts-sorter.onnx');
const IMAGE = path.join(PARTS, 'demo', 'hex-nut', 'hex-nut-0088.png');

describe('packaging: the CLI installed from its npm tarball into an empty project', function () {
  this.timeout(300_000);
  let dir = '';
  let tarball = '';
  const npmEnv = { ...process.env, ONNXRUNTIME_NODE_INSTALL: 'skip', npm_config_audit: 'false', npm_config_fund: 'false', npm_config_update_notifier: 'false' };

  before(() => {
    dir = mkdtempSync(path.join(tmpdir(), 'factfoil-consumer-'));
    const packed = JSON.parse(execFileSync('npm', ['pack', '--json', '--pack-destination', dir], { cwd: ROOT, env: npmEnv, encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] }));
    tarball = path.join(dir, packed[0].filename);
    (this as unknown as { files: string[] }).files = packed[0].files.map((f: { path: string }) => f.path);
  });
  after(() => { if (dir) rmSync(dir, { recursive: true, force: true }); });

  it('packs the built CLI and no sources, tests or fixtures', function () {
    const files = ((this.test!.parent as unknown as { files: string[] }).files ?? []).slice().sort();
    assert.deepEqual(files, ['LICENSE', 'README.md', 'dist/cli.js', 'dist/extension.js', 'package.json'],
      'npm always adds package.json and the main entry (dist/extension.js)');
  });

  it('installs into an empty project and answers predict and explain like the repository CLI', () => {
    const project = path.join(dir, 'project');
    mkdirSync(project);
    writeFileSync(path.join(project, 'package.json'), JSON.stringify({ name: 'consumer', version: '1.0.0', private: true }));
    const install = spawnSync('npm', ['install', '--prefer-offline', '--no-audit', '--no-fund', tarball], { cwd: project, env: npmEnv, encoding: 'utf8' });
    assert.equal(install.status, 0, `npm install failed:\n${install.stdout}\n${install.stderr}`);

    const npx = (...args: string[]) => {
      const r = spawnSync('npx', ['--no-install', 'factfoil', ...args], { cwd: project, env: npmEnv, encoding: 'utf8' });
      assert.equal(r.status, 0, `npx factfoil ${args.join(' ')} failed:\n${r.stderr}`);
      return JSON.parse(r.stdout);
    };
    const ours = (...args: string[]) => JSON.parse(execFileSync(process.execPath, [path.join(ROOT, 'dist', 'cli.js'), ...args], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] }));

    const predicted = npx('predict', IMAGE, '--model', MODEL, '--top', '3', '--json');
    assert.deepEqual(predicted.prediction, ours('predict', IMAGE, '--model', MODEL, '--top', '3', '--json').prediction);
    assert.equal(predicted.prediction.length, 3);

    const out = path.join(project, 'maps');
    mkdirSync(out);
    const explained = npx('explain', IMAGE, '--model', MODEL, '--map', 'contrast', '--layer', 'last', '--raw', '--out', out, '--json');
    assert.equal(explained.outputs.length, 1);
    const [o] = explained.outputs;
    assert.equal(o.map, 'contrast');
    assert.deepEqual(readFileSync(o.png).subarray(0, 8), Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]), 'a PNG file (PNG spec §5.2 signature)');
    assert.equal(JSON.parse(readFileSync(o.record, 'utf8')).format, 'factfoil-record/1');
    // The layer-resolution map equals the repository CLI's, byte for byte.
    const refOut = path.join(dir, 'ref-maps');
    mkdirSync(refOut);
    const ref = ours('explain', IMAGE, '--model', MODEL, '--map', 'contrast', '--layer', 'last', '--raw', '--out', refOut, '--json');
    assert.ok(o.raw && ref.outputs[0].raw);
    assert.deepEqual(readFileSync(o.raw), readFileSync(ref.outputs[0].raw));
    assert.deepEqual(readdirSync(out).sort(), readdirSync(refOut).sort());
  });
});
