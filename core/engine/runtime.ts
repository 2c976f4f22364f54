/** The one place that talks to onnxruntime-node: session creation with our options, and runs. */
import * as ort from 'onnxruntime-node';
import { UserError } from '../errors';

export interface RuntimeOptions {
  /** Intra-op threads; 0 lets the runtime decide. */
  threads: number;
  /** Keep freed buffers in onnxruntime's arena for the next run (faster reuse, memory held). Default off. */
  arena?: boolean;
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

function firstLine(s: string): string {
  return s.split('\n')[0].slice(0, 300);
}

export { ort };
