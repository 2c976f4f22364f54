/** The one place that talks to onnxruntime-node: session creation with our options, and runs. */
import * as ort from 'onnxruntime-node';
import { UserError } from '../errors';

export interface RuntimeOptions {
  /** Intra-op threads; 0 lets the runtime decide. */
  threads: number;
  /** Keep freed buffers in onnxruntime's arena for the next run (faster reuse, memory held). Default off. */
  arena?: boolean;
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

export async function createSession(bytes: Uint8Array, what: string, opts: RuntimeOptions = defaultRuntimeOptions): Promise<ort.InferenceSession> {
  try {
    return await ort.InferenceSession.create(bytes, {
      graphOptimizationLevel: opts.optimization ?? 'all',
      executionProviders: ['cpu'],
      ...(opts.threads ? { intraOpNumThreads: opts.threads } : {}),
      interOpNumThreads: 1,
      // The arena keeps peak buffers of large seed batches alive between runs; without it memory
      // returns to the system after each chunk (feasibility study finding).
      enableCpuMemArena: opts.arena ?? false,
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
