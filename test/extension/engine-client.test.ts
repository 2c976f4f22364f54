/**
 * The engine client against small scripted child processes (the real engine is tested in
 * test/core/engine/process.test.ts): what it makes of malformed answers, of a death from
 * memory exhaustion, and how it words exits.
 */
import { strict as assert } from 'node:assert';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { EngineClient, EngineRequestError, describeExit, engineHeapMiB } from '../../extension/engine-client';

function script(dir: string, name: string, body: string): string {
  const file = path.join(dir, name);
  writeFileSync(file, `process.send({ v: 1, type: 'ready', pid: process.pid });\nprocess.on('message', (m) => {\n${body}\n});\n`);
  return file;
}

describe('engine client', function () {
  this.timeout(60_000);
  let dir: string;
  const logs: string[] = [];
  const log = { info: (m: string) => logs.push(`info ${m}`), warn: (m: string) => logs.push(`warn ${m}`), error: (m: string) => logs.push(`error ${m}`) };
  before(() => { dir = mkdtempSync(path.join(tmpdir(), 'ff-client-')); });
  after(() => rmSync(dir, { recursive: true, force: true }));

  it('drops messages of another protocol version and fails a request whose answer is malformed', async () => {
    const file = script(dir, 'bad.js', `
      process.send({ v: 9, type: 'result', id: m.id, result: {} });
      process.send({ v: 1, type: 'result', id: m.id, result: { maps: [{ mapId: 'x' }] } });`);
    const c = new EngineClient({ script: file, log });
    try {
      await assert.rejects(c.request({ op: 'maps', viewId: 'v', kind: 'evidence', fact: 0, layers: ['l'], estimate: 'exact', probeSeeds: 1, budgetMiB: 64 }).result,
        (e: unknown) => e instanceof EngineRequestError && e.kind === 'internal' && /malformed maps answer/.test(e.message));
      assert.ok(logs.some((l) => /dropped a malformed message from the engine: message\.v: engine protocol 9/.test(l)));
      assert.ok(logs.some((l) => /malformed maps answer from the engine: maps result\.maps\[0\]/.test(l)));
    } finally {
      await c.dispose();
    }
  });

  it('words a V8 heap exhaustion as out of memory and restarts on the next request', async () => {
    // A real heap exhaustion under a small heap limit would take seconds; the child prints what V8 prints and aborts.
    const file = script(dir, 'oom.js', `
      if (m.request.op === 'crash') { process.stderr.write('FATAL ERROR: Reached heap limit Allocation failed - JavaScript heap out of memory\\n'); process.abort(); }
      else process.send({ v: 1, type: 'result', id: m.id, result: {} });`);
    const exits: string[] = [];
    const c = new EngineClient({ script: file, log, onExit: (e) => exits.push(e.message) });
    try {
      await assert.rejects(c.request({ op: 'crash', how: 'exit' }).result,
        (e: unknown) => e instanceof EngineRequestError && e.kind === 'stopped' && /ran out of memory/.test(e.message) && /memoryBudgetMB/.test(e.hint ?? ''));
      assert.deepEqual(exits, ['The Factfoil engine ran out of memory and was restarted.']);
      const gen = c.generation;
      assert.deepEqual(await c.request({ op: 'closeView', viewId: 'v' }).result, {});
      assert.equal(c.generation, gen + 1);
    } finally {
      await c.dispose();
    }
    await assert.rejects(c.request({ op: 'closeView', viewId: 'v' }).result, /shut down/);
  });

  it('describes exits in words', () => {
    assert.equal(describeExit(null, 'SIGKILL', '').outOfMemory, true);
    assert.match(describeExit(null, 'SIGKILL', '').message, /killed \(SIGKILL\)/);
    assert.match(describeExit(3, null, '').message, /stopped unexpectedly \(exit code 3\)/);
    assert.equal(describeExit(3, null, '').outOfMemory, false);
    assert.equal(describeExit(134, null, '').outOfMemory, true);
  });

  it('sets the engine heap limit to half the memory, between 1 and 4 GiB', () => {
    const GiB = 1024 ** 3;
    assert.equal(engineHeapMiB(1 * GiB), 1024);
    assert.equal(engineHeapMiB(6 * GiB), 3072);
    assert.equal(engineHeapMiB(64 * GiB), 4096);
  });
});
