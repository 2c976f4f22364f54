/**
 * A fuzz worker: a child process that runs cases sent by the harness one at a time and answers
 * with the outcome. Run as a separate process so that a hang, a native crash or memory
 * exhaustion in one case is seen by the harness, which kills and replaces the worker.
 */
import { Engine } from '../../core/engine/engine';
import { isUserError } from '../../core/errors';
import { exerciseImage, exerciseModel } from './pipeline';

export interface FuzzJob { id: number; kind: 'model' | 'image'; file: string; maps: boolean; request?: number }
export interface FuzzAnswer { id: number; outcome: 'ok' | 'user-error' | 'bug'; message: string; ms: number; dying?: boolean }

let current: FuzzJob | undefined;

function answer(a: FuzzAnswer): void {
  process.send!(a);
}

/** Anything thrown outside a case's promise is a bug of the case in flight. */
function fatal(e: unknown): void {
  answer({ id: current?.id ?? -1, outcome: 'bug', message: `unhandled: ${(e as Error)?.stack ?? String(e)}`, ms: 0, dying: true });
  setTimeout(() => process.exit(3), 50);
}
process.on('uncaughtException', fatal);
process.on('unhandledRejection', fatal);

async function runJob(job: FuzzJob): Promise<FuzzAnswer> {
  const t0 = performance.now();
  // A fresh engine per case: its caches are keyed by model hash and would only grow.
  const engine = new Engine({ threads: 1 });
  try {
    if (job.kind === 'model') {
      const r = await exerciseModel(engine, job.file, { maps: job.maps, request: job.request });
      return { id: job.id, outcome: 'ok', message: `${r.layers} layers, ${r.maps} maps`, ms: performance.now() - t0 };
    }
    const r = await exerciseImage(job.file);
    return { id: job.id, outcome: 'ok', message: `${r.width}×${r.height}${r.note ? `, ${r.note}` : ''}`, ms: performance.now() - t0 };
  } catch (e) {
    if (isUserError(e)) return { id: job.id, outcome: 'user-error', message: e.oneLine(), ms: performance.now() - t0 };
    return { id: job.id, outcome: 'bug', message: (e as Error)?.stack ?? String(e), ms: performance.now() - t0 };
  } finally {
    await engine.dispose();
  }
}

process.on('message', (job: FuzzJob) => {
  current = job;
  runJob(job).then((a) => { current = undefined; answer(a); }, fatal);
});
process.send!({ ready: true });
