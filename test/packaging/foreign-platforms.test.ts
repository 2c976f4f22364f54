/**
 * The linux-arm64 and win32-x64 packages run here, on x64 Linux, through Debian's
 * qemu-user-static and wine64 (scripts/run-foreign.sh): the engine of each .vsix, with the
 * native files of that package only, predicts a demo image and draws its contrast map, and both
 * are compared with the linux-x64 package's engine on the same image (top-3 classes the same,
 * each p within 1e-4; map relative L2 <= 1e-4: the bounds of issue 11). Skips, saying why,
 * when qemu or wine is not installed.
 */
import { strict as assert } from 'node:assert';
import { spawnSync } from 'node:child_process';
import * as path from 'node:path';

const ROOT = path.resolve(__dirname, '..', '..');
const has = (cmd: string) => spawnSync('sh', ['-c', `command -v ${cmd} || test -x /usr/lib/wine/${cmd}`]).status === 0;

function runForeign(target: string): { line: string; result: Record<string, unknown> } {
  const r = spawnSync(path.join(ROOT, 'scripts', 'run-foreign.sh'), [target], { cwd: ROOT, encoding: 'utf8', timeout: 600_000 });
  const out = `${r.stdout}${r.stderr}`;
  if (r.status === 3) return { line: out, result: { skipped: out.trim() } };
  assert.equal(r.status, 0, `scripts/run-foreign.sh ${target} failed:\n${out}`);
  const line = out.split('\n').find((l) => l.startsWith(`run-foreign: ${target} passed: `));
  assert.ok(line, out);
  return { line, result: JSON.parse(line.slice(line.indexOf('{'))) };
}

describe('packaging: foreign platforms run their own package', function () {
  this.timeout(600_000);

  for (const [target, tool] of [['linux-arm64', 'qemu-aarch64-static'], ['win32-x64', 'wine64']] as const) {
    it(`${target}: prediction and contrast map equal linux-x64's (under ${tool})`, function () {
      if (!has(tool)) {
        console.log(`      skipped: ${tool} is not installed (apt-get install ${tool === 'wine64' ? 'wine64' : 'qemu-user-static libc6-arm64-cross libstdc++6-arm64-cross libgcc-s1-arm64-cross'})`);
        this.skip();
      }
      const { result } = runForeign(target);
      if (result.skipped) { console.log(`      ${result.skipped}`); this.skip(); }
      assert.equal(result.platform, target);
      assert.equal(result.sameTop3, true);
      assert.ok((result.maxAbsDiffP as number) <= 1e-4, `max |Δp| ${result.maxAbsDiffP}`);
      assert.ok((result.mapRelL2 as number) <= 1e-4, `map rel L2 ${result.mapRelL2}`);
      assert.ok((result.rawRelL2 as number) <= 1e-4, `layer-resolution map rel L2 ${result.rawRelL2}`);
    });
  }
});
