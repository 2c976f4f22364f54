/** The one place that talks to onnxruntime-node: session creation with our options, and runs. */
import * as ort from 'onnxruntime-node';
import { UserError } from '../errors';

export interface RuntimeOptions {
  /** Intra-op threads; 0 lets the runtime decide. */
  threads: number;
  /**
   * Which sessions keep freed buffers in onnxruntime's arena for their next run: 'sweeps' (the
   * default) only the backward session of a split plan, which runs once per seed chunk at the
   * same shapes; 'always' every session; 'never' none. Without the arena every large tensor is a
   * fresh mmap whose pages fault on first touch, at every op of every chunk: on ResNet-18 the
   * exact sweep at stage 2 took 0.79× the time with it (test/bench/conv-ab.ts, 2-core AMD EPYC,
   * 3 Dec 2026), while the session holds about its peak between runs (about +300 MiB RSS after
   * the sweep, a peak 80 MiB lower: test/bench/chunk-memory.ts); the engine keeps one such
   * session. One-shot sessions (the first map, a forward) gain nothing from it.
   */
  arena?: 'sweeps' | 'always' | 'never';
  /**
   * Let idle intra-op threads spin between ops (onnxruntime's default). Off by default: when other
   * processes share the cores (the editor, a laptop's background work) a spinning pool waits on
   * descheduled threads at every op; on the 2-core bench machine under load, the first map took
   * 49–89 ms with spinning off against 205–244 ms with it on, a 64-seed chunk 2.2–2.5 s against
   * 3.4–4.9 s (test/bench, 2 Dec 2026).
   */
  spinning?: boolean;
  /** Graph optimization level (default 'all'). */
  optimization?: 'basic' | 'extended' | 'all';
}

export const defaultRuntimeOptions: RuntimeOptions = { threads: 0 };

/** `sweep`: the session runs once per seed chunk (a split plan's backward). */
export async function createSession(bytes: Uint8Array, what: string, opts: RuntimeOptions = defaultRuntimeOptions, sweep = false): Promise<ort.InferenceSession> {
  const arena = opts.arena ?? 'sweeps';
  try {
    return await ort.InferenceSession.create(bytes, {
      graphOptimizationLevel: opts.optimization ?? 'all',
      executionProviders: ['cpu'],
      ...(opts.threads ? { intraOpNumThreads: opts.threads } : {}),
      interOpNumThreads: 1,
      enableCpuMemArena: arena === 'always' || (arena === 'sweeps' && sweep),
      logSeverityLevel: 3,
      extra: { session: { intra_op: { allow_spinning: opts.spinning ? '1' : '0' } } },
    });
  } catch (e) {
    throw new UserError(`onnxruntime cannot load ${what}: ${firstLine((e as Error).message)}`, 'the model may use ops or types this runtime does not support');
  }
}

export type Feeds = Record<string, ort.Tensor>;

export function floatTensor(data: Float32Array, dims: number[]): ort.Tensor {
  return new ort.Tensor('float32', data, dims);
}

export async function runSession(s: ort.InferenceSession, feeds: Feeds, fetch: string[], what: string): Promise<Record<string, ort.Tensor>> {
  try {
    return (await s.run(feeds, fetch)) as Record<string, ort.Tensor>;
  } catch (e) {
    throw new UserError(`onnxruntime failed while running ${what}: ${firstLine((e as Error).message)}`, 'check the input shape and the model');
  }
}

/**
 * onnxruntime's reason, shortened: its graph errors repeat the node's whole signature before the
 * reason, and its status errors prefix source locations; keep the node and the reason.
 */
export function firstLine(s: string): string {
  let line = s.split('\n')[0];
  const node = /^This is an invalid model\. In Node, \("([^"]*)", ([\w.]+),.*?, Error (.*)$/.exec(line);
  if (node) line = `${node[2]} node '${node[1]}': ${node[3]}`;
  const status = line.lastIndexOf('[ONNXRuntimeError] : ');
  if (status >= 0) line = line.slice(status).replace(/^\[ONNXRuntimeError\] : \d+ : \w+ : /, '');
  return line.replace(/^(Exception during initialization: )?\S+\.(cc|h):\d+ ([\w:~]+ )?/, '').slice(0, 300);
}

export { ort };
