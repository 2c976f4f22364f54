import { promises as fsp, mkdirSync } from 'fs';
import * as path from 'path';
import { randomBytes } from 'crypto';
import { UserError } from '../errors';
import { errnoCode, fsUserError } from './fs-errors';

export interface AtomicWriteOptions {
  /** Refuse to replace an existing file (default true: saved maps are never overwritten, DESIGN §6). */
  noOverwrite?: boolean;
}

/**
 * Writes `data` so that readers see either no file or the whole file, never a partial one.
 * The bytes go to a temporary file in the same folder (same file system, so the final step is
 * atomic), are flushed, and then
 * - noOverwrite (default): hard-linked to the target, which fails with EEXIST if the target
 *   exists — an atomic "create only if absent", so two writers racing for a name cannot both win;
 * - otherwise: renamed over the target.
 * The temporary file is removed in every case.
 */
export async function writeFileAtomic(
  target: string,
  data: Uint8Array | string,
  opts: AtomicWriteOptions = {},
): Promise<void> {
  const noOverwrite = opts.noOverwrite ?? true;
  const tmp = tempPathBeside(target);
  try {
    await writeAndFlush(tmp, data);
  } catch (e) {
    await removeQuietly(tmp);
    throw fsUserError(e, 'write', target);
  }
  try {
    if (noOverwrite) {
      await linkNoOverwrite(tmp, target, data);
    } else {
      await fsp.rename(tmp, target);
    }
  } catch (e) {
    throw fsUserError(e, 'write', target);
  } finally {
    await removeQuietly(tmp);
  }
}

/** Atomic write that replaces an existing file: for sidecars and other files the tool owns. */
export function writeFileAtomicReplace(target: string, data: Uint8Array | string): Promise<void> {
  return writeFileAtomic(target, data, { noOverwrite: false });
}

/** The error thrown when noOverwrite finds the target present; callers may catch it to pick another name. */
export class TargetExistsError extends UserError {
  constructor(readonly target: string) {
    super(`will not overwrite ${target}: the file already exists`, 'choose another name or remove the file');
  }
}

async function linkNoOverwrite(tmp: string, target: string, data: Uint8Array | string): Promise<void> {
  try {
    await fsp.link(tmp, target);
    return;
  } catch (e) {
    const code = errnoCode(e);
    if (code === 'EEXIST') throw new TargetExistsError(target);
    // File systems without hard links (some network and FAT mounts) answer EPERM/ENOTSUP/EXDEV/ENOSYS.
    if (code !== 'EPERM' && code !== 'ENOTSUP' && code !== 'EXDEV' && code !== 'ENOSYS' && code !== 'EOPNOTSUPP') throw e;
  }
  // Fallback: exclusive create still never overwrites, though a reader may see the file while it fills.
  let handle: fsp.FileHandle;
  try {
    handle = await fsp.open(target, 'wx');
  } catch (e) {
    if (errnoCode(e) === 'EEXIST') throw new TargetExistsError(target);
    throw e;
  }
  try {
    await handle.writeFile(data);
    await handle.sync();
  } finally {
    await handle.close();
  }
}

async function writeAndFlush(file: string, data: Uint8Array | string): Promise<void> {
  const handle = await fsp.open(file, 'wx');
  try {
    await handle.writeFile(data);
    await handle.sync();
  } finally {
    await handle.close();
  }
}

/** A hidden, unique temporary name in the target's folder, so rename/link never cross file systems. */
export function tempPathBeside(target: string): string {
  const dir = path.dirname(target);
  const base = path.basename(target).slice(0, 100);
  return path.join(dir, `.${base}.${process.pid}.${randomBytes(6).toString('hex')}.tmp`);
}

async function removeQuietly(file: string): Promise<void> {
  try {
    await fsp.unlink(file);
  } catch {
    // already gone (renamed) or never created
  }
}

/**
 * `--out <dir>`: made when missing (with its parents) before any work, so a long run never
 * fails at its first write. Making a folder overwrites nothing.
 */
export function ensureOutputFolder(dir: string): void {
  try {
    mkdirSync(dir, { recursive: true }); // an existing folder is fine; an existing file is EEXIST
  } catch (e) {
    if (errnoCode(e) === 'EEXIST') throw new UserError(`cannot write into ${dir}: it is a file, not a folder`, 'give a folder for --out');
    throw fsUserError(e, 'write', dir);
  }
}
