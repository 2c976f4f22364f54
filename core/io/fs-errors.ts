import { UserError } from '../errors';

/** The errno code of a Node fs error, or undefined for anything else. */
export function errnoCode(e: unknown): string | undefined {
  const code = (e as { code?: unknown } | null)?.code;
  return typeof code === 'string' ? code : undefined;
}

/**
 * Turns the fs errors a user can cause (missing file, missing folder, no permission, a folder
 * where a file was expected, disk full) into a one-line UserError naming the file; anything else
 * is returned unchanged so it surfaces as a bug with its stack.
 */
export function fsUserError(e: unknown, action: 'read' | 'write', path: string): unknown {
  const code = errnoCode(e);
  const what = action === 'read' ? 'cannot read' : 'cannot write';
  switch (code) {
    case 'ENOENT':
      return action === 'read'
        ? new UserError(`${what} ${path}: no such file`, 'check the path')
        : new UserError(`${what} ${path}: the folder does not exist`, 'create the folder or choose another output folder');
    case 'EACCES':
    case 'EPERM':
      return new UserError(`${what} ${path}: permission denied`, 'check the file permissions');
    case 'EISDIR':
      return new UserError(`${what} ${path}: it is a folder, not a file`, 'give a file path');
    case 'ENOTDIR':
      return new UserError(`${what} ${path}: a part of the path is not a folder`, 'check the path');
    case 'ENOSPC':
      return new UserError(`${what} ${path}: the disk is full`, 'free some space');
    case 'EROFS':
      return new UserError(`${what} ${path}: the file system is read-only`, 'choose another output folder');
    case 'ENAMETOOLONG':
      return new UserError(`${what} ${path}: the file name is too long`, 'use a shorter path');
    default:
      return e;
  }
}
