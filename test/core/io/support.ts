/** Test support for core/io and core/image: temp folders and the Debian Python used as a reference. */
import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';

export const PYTHON = '/usr/bin/python3';

/** A fresh temp folder, removed after the suite. Call inside describe(). */
export function useTempDir(prefix: string): () => string {
  let dir = '';
  before(() => {
    dir = mkdtempSync(path.join(os.tmpdir(), `factfoil-${prefix}-`));
  });
  after(() => {
    if (dir) rmSync(dir, { recursive: true, force: true });
  });
  return () => dir;
}

/** Whether /usr/bin/python3 can import all the given modules. */
export function pythonHas(...modules: string[]): boolean {
  if (!existsSync(PYTHON)) return false;
  try {
    execFileSync(PYTHON, ['-c', modules.map((m) => `import ${m}`).join('; ')], { stdio: 'ignore' });
    return true;
  } catch {
    return false;
  }
}

/** Runs a Python script with /usr/bin/python3 and returns its stdout. */
export function runPython(script: string, args: string[] = []): Buffer {
  return execFileSync(PYTHON, ['-c', script, ...args], { maxBuffer: 64 * 1024 * 1024 });
}

/** Skips the current test (with the reason printed by mocha) unless Python has the modules. */
export function requirePython(ctx: Mocha.Context, ...modules: string[]): void {
  if (!pythonHas(...modules)) {
    console.warn(`      skipped: ${PYTHON} with ${modules.join(', ')} is not available`);
    ctx.skip();
  }
}

/** Asserts that `fn` rejects with a UserError whose one-line message matches every pattern. */
export async function rejectsUserError(fn: () => Promise<unknown>, ...patterns: (RegExp | string)[]): Promise<string> {
  try {
    await fn();
  } catch (e) {
    const err = e as { name?: string; message?: string; oneLine?: () => string };
    if (err.name !== 'UserError') throw new Error(`expected a UserError, got ${String(e)}${(e as Error).stack ? '\n' + (e as Error).stack : ''}`);
    const line = err.oneLine ? err.oneLine() : String(err.message);
    if (line.includes('\n')) throw new Error(`UserError message is not one line: ${JSON.stringify(line)}`);
    for (const p of patterns) {
      const ok = typeof p === 'string' ? line.includes(p) : p.test(line);
      if (!ok) throw new Error(`UserError "${line}" does not match ${String(p)}`);
    }
    return line;
  }
  throw new Error('expected a UserError, but it resolved');
}

/** The synchronous form of rejectsUserError. */
export function throwsUserError(fn: () => unknown, ...patterns: (RegExp | string)[]): string {
  try {
    fn();
  } catch (e) {
    const err = e as { name?: string; message?: string; oneLine?: () => string };
    if (err.name !== 'UserError') throw new Error(`expected a UserError, got ${String(e)}`);
    const line = err.oneLine ? err.oneLine() : String(err.message);
    for (const p of patterns) {
      const ok = typeof p === 'string' ? line.includes(p) : p.test(line);
      if (!ok) throw new Error(`UserError "${line}" does not match ${String(p)}`);
    }
    return line;
  }
  throw new Error('expected a UserError, but it returned');
}
