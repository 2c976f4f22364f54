/**
 * The fuzz harness: seeded cases (mutated fixture models and images) run in worker processes
 * under a per-case time limit. Every case must end in success or a UserError; anything else — an
 * other exception, an unhandled rejection, a hang past the limit, a worker that dies — is a
 * failure, reported with its seed and the input that caused it.
 */
import { fork, ChildProcess } from 'node:child_process';
import { copyFileSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { mutateImage, mutateModel, rngFor } from './mutate';
import type { FuzzAnswer, FuzzJob } from './worker';

const FIXTURES = path.resolve(__dirname, '../../test-fixtures');

/** Seed models: the demo, and two architecture fixtures with other op mixes (pads, pools, tokens). */
export const SEED_MODELS = ['parts/parts-sorter.onnx', 'arch/extras/model.onnx', 'arch/densenet/model.onnx', 'arch/vit/model.onnx'].map((p) => path.join(FIXTURES, p));

export interface FuzzOptions {
  cases: number;
  seed: number;
  /** Worker processes (default 2). */
  workers?: number;
  /** Per-case time limit, ms (default 20 000). */
  timeoutMs?: number;
  /** Per-worker resident memory limit, bytes (default 4 GiB): a case past it is killed, so a runaway allocation cannot take the machine down. */
  memoryBytes?: number;
  /** Share of cases that are images (default 0.4). */
  imageShare?: number;
  /** Share of surviving model cases that also compute a map (default 0.5). */
  mapShare?: number;
  /** Seed models (files; default SEED_MODELS). */
  models?: string[];
  /** Seed images (files); made from the demo by makeSeedImages when absent. */
  images?: string[];
  onProgress?: (done: number, total: number) => void;
  /** When set, each failing case's input is copied here as `<kind>-<outcome>-seed<S><ext>` with a `.txt` note. */
  keepDir?: string;
}

export interface FuzzCase { id: number; seed: number; kind: 'model' | 'image'; source: string; what: string; file: string; maps: boolean; request?: number }
export interface FuzzFailure { case: FuzzCase; outcome: 'bug' | 'hang' | 'crash' | 'memory'; message: string }

export interface FuzzReport {
  cases: number;
  ok: number;
  userErrors: number;
  failures: FuzzFailure[];
  /** Distinct UserError messages, the case's file path replaced by <file>. */
  distinctMessages: Map<string, number>;
  slowest: { case: FuzzCase; ms: number; outcome: string };
  wallMs: number;
  byKind: Record<string, { ok: number; userErrors: number; failures: number }>;
}

/** Seed images in every raster format the decoder reads, from one demo image (sharp). */
export async function makeSeedImages(dir: string): Promise<string[]> {
  const sharp = (await import('sharp')).default;
  const src = path.join(FIXTURES, 'parts/demo/bearing/bearing-0002.png');
  const base = sharp(src).resize(48, 40);
  const out: string[] = [];
  const add = async (name: string, make: (s: import('sharp').Sharp) => import('sharp').Sharp) => {
    const f = path.join(dir, name);
    await make(base.clone()).toFile(f);
    out.push(f);
  };
  await add('seed.png', (s) => s.png());
  await add('seed-alpha.png', (s) => s.ensureAlpha(0.5).png());
  await add('seed-palette.png', (s) => s.png({ palette: true, colours: 16 }));
  await add('seed16.png', (s) => s.toColourspace('rgb16').png());
  await add('seed.jpg', (s) => s.jpeg({ quality: 80 }));
  await add('seed-progressive.jpg', (s) => s.jpeg({ progressive: true }));
  await add('seed.webp', (s) => s.webp());
  await add('seed-lossless.webp', (s) => s.webp({ lossless: true }));
  await add('seed.gif', (s) => s.gif());
  await add('seed.tif', (s) => s.tiff({ compression: 'lzw' }));
  await add('seed-cmyk.jpg', (s) => s.toColourspace('cmyk').jpeg());
  return out;
}

/** The cases of a run, a pure function of (seed, count): case i uses seed `seed + i`. */
function planCases(opts: FuzzOptions, images: string[], dir: string): FuzzCase[] {
  const modelFiles = opts.models ?? SEED_MODELS;
  const models = modelFiles.map((f) => readFileSync(f));
  const imageBytes = images.map((f) => readFileSync(f));
  const out: FuzzCase[] = [];
  for (let id = 0; id < opts.cases; id++) {
    const seed = (opts.seed + id) >>> 0;
    const r = rngFor(seed);
    const isImage = r() < (opts.imageShare ?? 0.4);
    const pool = isImage ? imageBytes : models;
    const k = Math.floor(r() * pool.length);
    const m = isImage ? mutateImage(pool[k], r) : mutateModel(pool[k], r);
    const source = isImage ? images[k] : modelFiles[k];
    const ext = path.extname(source);
    const file = path.join(dir, `case-${id}${ext}`);
    writeFileSync(file, m.bytes);
    out.push({ id, seed, kind: isImage ? 'image' : 'model', source: path.relative(FIXTURES, source), what: m.what, file, maps: r() < (opts.mapShare ?? 0.5), request: seed % 3 });
  }
  return out;
}

interface Slot { child: ChildProcess; job?: FuzzCase; timer?: NodeJS.Timeout; started: number }

function spawnWorker(): Promise<ChildProcess> {
  const child = fork(path.join(__dirname, 'worker.ts'), [], {
    execArgv: ['--import', 'tsx'],
    stdio: ['ignore', 'ignore', 'pipe', 'ipc'],
    // stderr is captured: the runtime's native log lines stay out of the output, and its tail explains a crash.
  });
  return new Promise((resolve, reject) => {
    child.once('message', () => resolve(child));
    child.once('exit', (code) => reject(new Error(`fuzz worker exited during start-up (code ${code})`)));
  });
}

/** Runs a fuzz campaign; never throws for a failing case (they are in the report). */
export async function runFuzz(opts: FuzzOptions): Promise<FuzzReport> {
  const t0 = Date.now();
  const dir = mkdtempSync(path.join(tmpdir(), 'factfoil-fuzz-'));
  try {
    const images = opts.images ?? (await makeSeedImages(dir));
    const report = await runCases(planCases(opts, images, dir), opts);
    report.wallMs = Date.now() - t0;
    return report;
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

/** Replays given files (e.g. kept regressions) as cases: models with a map request, images decoded. */
export function replayFiles(files: string[], opts: Pick<FuzzOptions, 'workers' | 'timeoutMs'> = {}): Promise<FuzzReport> {
  const cases: FuzzCase[] = files.map((file, id) => ({
    id, seed: 0, kind: file.endsWith('.onnx') ? 'model' : 'image', source: path.basename(file), what: 'replay', file, maps: true,
  }));
  return runCases(cases, { cases: cases.length, seed: 0, ...opts });
}

/** Runs cases in a pool of worker processes, one case per worker at a time, each under the time limit. */
async function runCases(cases: FuzzCase[], opts: FuzzOptions): Promise<FuzzReport> {
  const t0 = Date.now();
  const report: FuzzReport = {
    cases: cases.length, ok: 0, userErrors: 0, failures: [], distinctMessages: new Map(),
    slowest: { case: cases[0], ms: -1, outcome: '' }, wallMs: 0, byKind: {},
  };
  const tally = (c: FuzzCase, field: 'ok' | 'userErrors' | 'failures') => {
    const key = `${c.kind}: ${c.what.split(':').slice(0, 2).join(':')}`;
    const t = (report.byKind[key] ??= { ok: 0, userErrors: 0, failures: 0 });
    t[field]++;
  };
  const timeoutMs = opts.timeoutMs ?? 20_000;
  let next = 0, done = 0;
  await new Promise<void>((resolve, reject) => {
    const finish = (slot: Slot, c: FuzzCase, outcome: FuzzAnswer['outcome'] | FuzzFailure['outcome'], message: string, ms: number) => {
      clearTimeout(slot.timer);
      slot.job = undefined;
      if (ms > report.slowest.ms) report.slowest = { case: c, ms, outcome };
      if (outcome === 'ok') { report.ok++; tally(c, 'ok'); } else if (outcome === 'user-error') {
        report.userErrors++;
        tally(c, 'userErrors');
        const key = message.split(c.file).join('<file>');
        report.distinctMessages.set(key, (report.distinctMessages.get(key) ?? 0) + 1);
      } else {
        report.failures.push({ case: c, outcome, message });
        tally(c, 'failures');
        if (opts.keepDir) keepFailure({ case: c, outcome, message }, opts.keepDir);
      }
      done++;
      opts.onProgress?.(done, cases.length);
      if (done === cases.length) { clearInterval(watchdog); resolve(); }
    };
    const slots: Slot[] = [];
    const memoryBytes = opts.memoryBytes ?? 4 * 2 ** 30;
    const watchdog = setInterval(() => {
      for (const slot of slots) {
        const c = slot.job;
        const rss = c && slot.child.pid ? residentBytes(slot.child.pid) : 0;
        if (c && rss > memoryBytes) {
          finish(slot, c, 'memory', `worker passed ${(memoryBytes / 2 ** 20).toFixed(0)} MiB resident (${(rss / 2 ** 20).toFixed(0)} MiB)`, Date.now() - slot.started);
          slot.child.kill('SIGKILL');
        }
      }
    }, 200);
    const feed = (slot: Slot) => {
      if (next >= cases.length) { slot.child.kill(); return; }
      const c = cases[next++];
      slot.job = c;
      slot.started = Date.now();
      slot.timer = setTimeout(() => {
        // A hang: kill the worker; its exit handler replaces it.
        finish(slot, c, 'hang', `no answer within ${timeoutMs} ms`, Date.now() - slot.started);
        slot.child.kill('SIGKILL');
      }, timeoutMs);
      const job: FuzzJob = { id: c.id, kind: c.kind, file: c.file, maps: c.maps, request: c.request };
      slot.child.send(job);
    };
    const attach = (slot: Slot) => {
      let errTail = '';
      slot.child.stderr!.on('data', (d) => { errTail = (errTail + d).slice(-2000); });
      slot.child.on('message', (a: FuzzAnswer) => {
        const c = slot.job;
        if (!c || a.id !== c.id) return;
        finish(slot, c, a.outcome, a.message, a.ms);
        // A worker that caught an unhandled error exits next; its exit handler replaces it.
        if (!a.dying) feed(slot);
      });
      slot.child.on('exit', (code, signal) => {
        const c = slot.job;
        if (c) finish(slot, c, 'crash', `worker died (${signal ?? `exit ${code}`}): ${errTail.trim().split('\n').slice(-3).join(' | ')}`, Date.now() - slot.started);
        if (next < cases.length || slot.job) {
          spawnWorker().then((child) => { slot.child = child; attach(slot); feed(slot); }, reject);
        }
      });
    };
    const width = Math.max(1, Math.min(opts.workers ?? 2, cases.length));
    if (!cases.length) { clearInterval(watchdog); resolve(); }
    for (let i = 0; i < width; i++) {
      spawnWorker().then((child) => { const slot: Slot = { child, started: 0 }; slots.push(slot); attach(slot); feed(slot); }, reject);
    }
  });
  report.wallMs = Date.now() - t0;
  return report;
}

/** Resident set size of a process (Linux /proc/<pid>/statm: pages), 0 where unavailable. */
function residentBytes(pid: number): number {
  try { return Number(readFileSync(`/proc/${pid}/statm`, 'utf8').split(' ')[1]) * 4096; } catch { return 0; }
}

/** Copies a failing case's input into `dir` as `<kind>-<outcome>-seed<S><ext>`, with a note of how it was made. */
function keepFailure(f: FuzzFailure, dir: string): void {
  mkdirSync(dir, { recursive: true });
  const name = `${f.case.kind}-${f.outcome}-seed${f.case.seed}${path.extname(f.case.file)}`;
  copyFileSync(f.case.file, path.join(dir, name));
  writeFileSync(path.join(dir, `${name}.txt`), `${f.case.what}\nfrom ${f.case.source}\n${f.outcome}: ${f.message.split('\n')[0]}\n`);
}

/** A short human summary of a report. */
export function summarize(r: FuzzReport): string {
  const lines = [
    `${r.cases} cases in ${(r.wallMs / 1000).toFixed(1)} s: ${r.ok} ok, ${r.userErrors} user errors (${r.distinctMessages.size} distinct messages, ${messageKinds(r).size} kinds), ${r.failures.length} failures`,
    `slowest: case ${r.slowest.case?.id} (seed ${r.slowest.case?.seed}, ${r.slowest.case?.kind} ${r.slowest.case?.what}) ${r.slowest.ms.toFixed(0)} ms → ${r.slowest.outcome}`,
  ];
  for (const f of r.failures.slice(0, 20)) lines.push(`FAIL ${f.outcome} seed ${f.case.seed} ${f.case.kind} ${f.case.source} [${f.case.what}]: ${f.message.split('\n').slice(0, 4).join(' | ')}`);
  return lines.join('\n');
}

/** Messages with names, numbers and quoted detail blanked: how many different kinds of reason were given. */
export function messageKinds(r: FuzzReport): Map<string, number> {
  const kinds = new Map<string, number>();
  for (const [m, n] of r.distinctMessages) {
    const k = m.replace(/'[^']*'/g, "'…'").replace(/\([^()]*\)/g, '(…)').replace(/\[[^\]]*\]/g, '[…]').replace(/-?\d+(\.\d+)?(e[+-]?\d+)?/g, '#');
    kinds.set(k, (kinds.get(k) ?? 0) + n);
  }
  return kinds;
}
