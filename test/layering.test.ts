/**
 * Which room may import which (DEVELOPERS.md "Layout"): arrows point down only. Read from the
 * import lines of every source file, so a new upward import fails here with its file and line.
 */
import { strict as assert } from 'node:assert';
import { readdirSync, readFileSync } from 'node:fs';
import * as path from 'node:path';

const ROOT = path.resolve(__dirname, '..');

function sources(dir: string): string[] {
  return readdirSync(path.join(ROOT, dir), { withFileTypes: true }).flatMap((e) => {
    const rel = path.join(dir, e.name);
    return e.isDirectory() ? sources(rel) : e.name.endsWith('.ts') ? [rel] : [];
  });
}

/**
 * Each import of a file as [line number, the room it lands in: 'core/engine', 'extension', a
 * package name]: `from '…'` (also spanning lines), side-effect imports, `import('…')` types and require.
 */
function importsOf(file: string): [number, string][] {
  const text = readFileSync(path.join(ROOT, file), 'utf8');
  const out: [number, string][] = [];
  for (const m of text.matchAll(/\bfrom\s+['"]([^'"]+)['"]|^\s*import\s+['"]([^'"]+)['"]|\b(?:import|require)\(\s*['"]([^'"]+)['"]\s*\)/gm)) {
    const spec = m[1] ?? m[2] ?? m[3];
    const line = text.slice(0, m.index).split('\n').length;
    if (!spec.startsWith('.')) { out.push([line, spec.startsWith('node:') ? 'node' : spec]); continue; }
    const parts = path.relative(ROOT, path.resolve(ROOT, path.dirname(file), spec)).split(path.sep);
    out.push([line, parts[0] === 'core' && parts.length > 2 ? `core/${parts[1]}` : parts[0]]);
  }
  return out;
}

function roomOf(file: string): string {
  const parts = file.split(path.sep);
  return parts[0] === 'core' && parts.length > 2 ? `core/${parts[1]}` : parts[0];
}

/** Rooms a room must never import. */
const FORBIDDEN: Record<string, string[]> = {
  'core/engine': ['core/methods', 'core/trust', 'core/workflow', 'core/cli', 'core/engine-process', 'core/io', 'core/image', 'core/metrics'],
  'core/methods': ['core/workflow', 'core/cli', 'core/engine-process'],
  'core/trust': ['core/workflow', 'core/cli', 'core/engine-process'],
  'core/workflow': ['core/cli', 'core/engine-process'],
  'core/cli': ['core/engine-process', 'extension', 'webview'],
  'core/engine-process': ['core/cli', 'extension', 'webview'],
};

describe('layering: arrows point down only (DEVELOPERS.md Layout)', () => {
  const files = [...sources('core'), ...sources('extension'), ...sources('webview')];

  for (const [room, banned] of Object.entries(FORBIDDEN)) {
    it(`${room} imports none of ${banned.join(', ')}`, () => {
      const bad = files.filter((f) => roomOf(f) === room)
        .flatMap((f) => importsOf(f).filter(([, to]) => banned.includes(to)).map(([line, to]) => `${f}:${line} → ${to}`));
      assert.deepEqual(bad, []);
    });
  }

  it('core never imports vscode; webview imports neither vscode nor onnxruntime; extension never imports onnxruntime', () => {
    const bad = files.flatMap((f) => importsOf(f).filter(([, to]) =>
      (f.startsWith('core') && to === 'vscode') ||
      (f.startsWith('webview') && (to === 'vscode' || to === 'onnxruntime-node' || to === 'sharp' || to === 'node' || to.startsWith('core/engine'))) ||
      (f.startsWith('extension') && to === 'onnxruntime-node')).map(([line, to]) => `${f}:${line} → ${to}`));
    assert.deepEqual(bad, []);
  });

  it('the reader sees real imports (the check is not empty)', () => {
    assert.ok(importsOf(path.join('core', 'cli', 'main.ts')).some(([, to]) => to === 'core/workflow'));
    assert.ok(importsOf(path.join('extension', 'engine-client.ts')).some(([, to]) => to === 'core/engine-process'));
  });
});
