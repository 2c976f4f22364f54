// Helpers of scripts/run-foreign.sh:
//   node scripts/package-foreign.mjs unpack <file.vsix> <dir>     unpack an archive (every entry)
//   node scripts/package-foreign.mjs compare <ref.json> <run.json> compare a foreign run with x64
// compare: the top-3 classes must be the same, each probability within 1e-4, and the contrast
// map (display resolution and layer resolution) within relative L2 1e-4 (the acceptance of
// issue 11); prints the numbers, exits 1 when a bound is broken.
import { mkdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { zipEntries } from './platform-targets.mjs';

const [command, a, b] = process.argv.slice(2);

if (command === 'unpack') {
  rmSync(b, { recursive: true, force: true });
  for (const e of zipEntries(a)) {
    if (e.name.endsWith('/')) continue;
    if (e.name.split('/').includes('..')) throw new Error(`${a}: entry ${e.name} leaves the folder`);
    mkdirSync(dirname(join(b, e.name)), { recursive: true });
    writeFileSync(join(b, e.name), e.read());
  }
} else if (command === 'compare') {
  const ref = JSON.parse(readFileSync(a, 'utf8')), run = JSON.parse(readFileSync(b, 'utf8'));
  if (!ref.ok) { console.error(`x64 reference failed: ${ref.error}\n${ref.engineLog}`); process.exit(1); }
  if (!run.ok) { console.error(`foreign run failed: ${run.error}\n${run.engineLog}`); process.exit(1); }
  const relL2 = (x, y) => {
    if (x.length !== y.length) return Infinity;
    let d = 0, n = 0;
    for (let i = 0; i < x.length; i++) { d += (x[i] - y[i]) ** 2; n += y[i] ** 2; }
    return Math.sqrt(d) / Math.max(Math.sqrt(n), 1e-30);
  };
  const sameClasses = run.top3.every((c, i) => c.index === ref.top3[i].index);
  const dp = Math.max(...run.top3.map((c, i) => Math.abs(c.p - ref.top3[i].p)));
  const mapL2 = relL2(run.map.values, ref.map.values), rawL2 = relL2(run.map.raw, ref.map.raw);
  const ok = sameClasses && dp <= 1e-4 && mapL2 <= 1e-4 && rawL2 <= 1e-4 && run.layer === ref.layer;
  console.log(JSON.stringify({
    ok, platform: `${run.platform}-${run.arch}`, node: run.node, top3: run.top3.map((c) => `${c.label} ${c.p.toFixed(6)}`),
    sameTop3: sameClasses, maxAbsDiffP: dp, layer: run.layer, mapRelL2: mapL2, rawRelL2: rawL2,
    mapSize: `${run.map.width}x${run.map.height}`, engineReadyMs: run.readyMs, contrastMapMs: run.mapMs,
  }));
  process.exit(ok ? 0 : 1);
} else {
  console.error('usage: package-foreign.mjs unpack <file.vsix> <dir> | compare <ref.json> <run.json>');
  process.exit(2);
}
