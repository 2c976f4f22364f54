/**
 * The extension's end of the engine process (DESIGN §3): forks dist/engine-process.js, numbers
 * requests, forwards progress and partial answers, cancels, and notices when the process dies
 * (crash, out of memory, killed) — every pending request then fails with a clear message, and
 * the next request starts a fresh process. No vscode import: the caller passes a log sink.
 */
import { ChildProcess, fork } from 'node:child_process';
import { totalmem } from 'node:os';
import {
  ENGINE_PROTOCOL_VERSION, EngineOp, EngineRequestOf, EngineResultOf, ErrorKind, FromEngine, ToEngine,
  checkEngineResult, checkFromEngine,
} from '../core/engine-process/protocol';

export interface EngineLog {
  info(message: string): void;
  warn(message: string): void;
  error(message: string): void;
}

/** Why a request failed: the user's input, a cancel, a bug in the engine, or the process died. */
export type EngineFailure = ErrorKind | 'stopped';

export class EngineRequestError extends Error {
  constructor(readonly kind: EngineFailure, message: string, readonly hint?: string) {
    super(message);
    this.name = 'EngineRequestError';
  }
}

export interface EngineExit {
  code: number | null;
  signal: NodeJS.Signals | null;
  /** One line for the user: what happened. */
  message: string;
  hint: string;
  outOfMemory: boolean;
}

export interface RequestHandlers<O extends EngineOp> {
  onProgress?(done: number, total: number, message?: string): void;
  onPartial?(result: EngineResultOf<O>): void;
}

export interface PendingRequest<O extends EngineOp> {
  id: number;
  result: Promise<EngineResultOf<O>>;
}

/** The part of the client the panel and editor use; tests give a fake. */
export interface EngineLike {
  request<O extends EngineOp>(req: EngineRequestOf<O>, handlers?: RequestHandlers<O>): PendingRequest<O>;
  cancel(id: number): void;
  /** Goes up by one each time a fresh process starts, so holders of view ids know to reopen. */
  readonly generation: number;
}

export interface EngineClientOptions {
  /** Path of dist/engine-process.js. */
  script: string;
  log: EngineLog;
  /** Intra-op threads for onnxruntime, read at each start; 0 lets it decide. */
  threads?: () => number;
  /** Extra environment (tests turn on the crash hook). */
  env?: Record<string, string>;
  /** Told when the process dies while it was wanted. */
  onExit?(exit: EngineExit): void;
}

/**
 * The V8 heap limit of the engine: half the machine's memory, at least 1 GiB and at most 4 GiB.
 * Tensors live outside the V8 heap (ArrayBuffers), so the heap only holds the model graph and
 * bookkeeping; the limit makes a runaway heap fail in this process instead of swapping the editor.
 * A rule of thumb, no source.
 */
export function engineHeapMiB(totalBytes = totalmem()): number {
  return Math.max(1024, Math.min(4096, Math.floor(totalBytes / 2 / 1024 / 1024)));
}

/** What a death of the engine process means, in words for the user. */
export function describeExit(code: number | null, signal: NodeJS.Signals | null, stderrTail: string): EngineExit {
  const heap = /heap out of memory|Allocation failed|out of memory/i.test(stderrTail);
  const base = { code, signal };
  if (heap || signal === 'SIGABRT' || code === 134) {
    return { ...base, outOfMemory: true, message: 'The Factfoil engine ran out of memory and was restarted.', hint: 'Lower factfoil.memoryBudgetMB, use a probe estimate, or explain fewer layers at once.' };
  }
  if (signal === 'SIGKILL') {
    return { ...base, outOfMemory: true, message: 'The Factfoil engine was killed (SIGKILL), most often by the system running out of memory; it will restart.', hint: 'Lower factfoil.memoryBudgetMB or close other memory-hungry programs.' };
  }
  const how = signal ? `signal ${signal}` : `exit code ${code}`;
  return { ...base, outOfMemory: false, message: `The Factfoil engine stopped unexpectedly (${how}) and will restart.`, hint: 'Details are in the Factfoil output channel.' };
}

interface Pending {
  op: EngineOp;
  resolve(v: unknown): void;
  reject(e: Error): void;
  handlers: RequestHandlers<EngineOp>;
}

export class EngineClient implements EngineLike {
  private child?: ChildProcess;
  private readonly pending = new Map<number, Pending>();
  private nextId = 1;
  private stderrTail = '';
  private disposed = false;
  private gen = 0;

  constructor(private readonly opts: EngineClientOptions) {}

  get generation(): number { return this.gen; }
  get running(): boolean { return !!this.child && this.child.exitCode === null && this.child.signalCode === null; }
  get pid(): number | undefined { return this.child?.pid; }
  /** Requests still waiting for an answer. */
  get busy(): boolean { return this.pending.size > 0; }

  request<O extends EngineOp>(req: EngineRequestOf<O>, handlers: RequestHandlers<O> = {}): PendingRequest<O> {
    const id = this.nextId++;
    const result = new Promise<EngineResultOf<O>>((resolve, reject) => {
      if (this.disposed) { reject(new EngineRequestError('stopped', 'the Factfoil engine has been shut down')); return; }
      const child = this.ensureStarted();
      this.pending.set(id, { op: req.op, resolve: resolve as (v: unknown) => void, reject, handlers: handlers as RequestHandlers<EngineOp> });
      this.send(child, { v: ENGINE_PROTOCOL_VERSION, type: 'request', id, request: req as never });
    });
    return { id, result };
  }

  cancel(id: number): void {
    if (this.child && this.pending.has(id)) this.send(this.child, { v: ENGINE_PROTOCOL_VERSION, type: 'cancel', id });
  }

  /** Stops the process (pending requests fail) and starts a fresh one on the next request. */
  async restart(): Promise<void> {
    const child = this.child;
    if (!child) return;
    this.child = undefined;
    this.failAll(new EngineRequestError('stopped', 'the Factfoil engine was restarted'));
    await this.stop(child);
  }

  async dispose(): Promise<void> {
    this.disposed = true;
    await this.restart();
  }

  private ensureStarted(): ChildProcess {
    if (this.child && this.running) return this.child;
    const threads = this.opts.threads?.() ?? 0;
    const args = [`--threads=${threads}`];
    const child = fork(this.opts.script, args, {
      execArgv: [`--max-old-space-size=${engineHeapMiB()}`],
      env: { ...process.env, ...this.opts.env },
      stdio: ['ignore', 'pipe', 'pipe', 'ipc'],
      serialization: 'json',
    });
    this.child = child;
    this.gen++;
    this.stderrTail = '';
    this.opts.log.info(`engine process ${child.pid} started (${this.opts.script}, heap limit ${engineHeapMiB()} MiB, threads ${threads || 'auto'})`);
    child.stdout?.on('data', (d: Buffer) => this.opts.log.info(`[engine] ${d.toString().trimEnd()}`));
    child.stderr?.on('data', (d: Buffer) => {
      const text = d.toString();
      this.stderrTail = (this.stderrTail + text).slice(-4000);
      this.opts.log.warn(`[engine] ${text.trimEnd()}`);
    });
    child.on('message', (m) => this.receive(child, m));
    child.on('error', (e) => this.opts.log.error(`engine process error: ${e.message}`));
    child.on('exit', (code, signal) => this.exited(child, code, signal));
    return child;
  }

  private send(child: ChildProcess, m: ToEngine): void {
    try {
      child.send(m, (e) => { if (e) this.opts.log.warn(`could not send to the engine: ${e.message}`); });
    } catch (e) {
      this.opts.log.warn(`could not send to the engine: ${(e as Error).message}`);
    }
  }

  private receive(child: ChildProcess, raw: unknown): void {
    if (child !== this.child) return;
    let m: FromEngine;
    try {
      m = checkFromEngine(raw);
    } catch (e) {
      this.opts.log.error(`dropped a malformed message from the engine: ${(e as Error).message}`);
      return;
    }
    if (m.type === 'ready') { this.opts.log.info(`engine process ${m.pid} ready (protocol ${ENGINE_PROTOCOL_VERSION})`); return; }
    if (m.type === 'log') {
      (m.level === 'error' ? this.opts.log.error : m.level === 'warning' ? this.opts.log.warn : this.opts.log.info).call(this.opts.log, `[engine] ${m.message}`);
      return;
    }
    const p = this.pending.get(m.id);
    if (!p) return; // answered already (e.g. cancelled and failed on our side)
    switch (m.type) {
      case 'progress': p.handlers.onProgress?.(m.done, m.total, m.message); return;
      case 'partial':
      case 'result': {
        let result: unknown;
        try {
          result = checkEngineResult(p.op, m.result);
        } catch (e) {
          this.pending.delete(m.id);
          this.opts.log.error(`malformed ${p.op} answer from the engine: ${(e as Error).message}`);
          p.reject(new EngineRequestError('internal', `the engine sent a malformed ${p.op} answer`, 'details are in the Factfoil output channel'));
          return;
        }
        if (m.type === 'partial') { p.handlers.onPartial?.(result as never); return; }
        this.pending.delete(m.id);
        p.resolve(result);
        return;
      }
      case 'error':
        this.pending.delete(m.id);
        if (m.stack) this.opts.log.error(`[engine] ${p.op} failed: ${m.stack}`);
        p.reject(new EngineRequestError(m.kind, m.message, m.hint));
        return;
    }
  }

  private exited(child: ChildProcess, code: number | null, signal: NodeJS.Signals | null): void {
    if (child !== this.child) return; // a process we stopped on purpose
    this.child = undefined;
    const exit = describeExit(code, signal, this.stderrTail);
    this.opts.log.error(`engine process ${child.pid} exited (code ${code}, signal ${signal}): ${exit.message}`);
    this.failAll(new EngineRequestError('stopped', exit.message, exit.hint));
    if (!this.disposed) this.opts.onExit?.(exit);
  }

  private failAll(e: EngineRequestError): void {
    const all = [...this.pending.values()];
    this.pending.clear();
    for (const p of all) p.reject(e);
  }

  private stop(child: ChildProcess): Promise<void> {
    return new Promise((resolve) => {
      if (child.exitCode !== null || child.signalCode !== null) { resolve(); return; }
      const timer = setTimeout(() => child.kill('SIGKILL'), 2000);
      child.once('exit', () => { clearTimeout(timer); resolve(); });
      if (child.connected) child.disconnect();
      else child.kill('SIGTERM');
    });
  }
}
