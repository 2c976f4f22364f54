/**
 * Tiny runtime checks for messages crossing the webview boundary. Each check takes an unknown
 * value and either returns it typed or throws a MessageShapeError naming the path that failed,
 * so the receiving side can drop the message and log one line saying why.
 * Pure TypeScript: no DOM, no Node, so both the extension host and the webview can import it.
 */
export class MessageShapeError extends Error {
  constructor(readonly path: string, what: string) {
    super(`${path}: ${what}`);
    this.name = 'MessageShapeError';
  }
}

export type Check<T> = (value: unknown, path: string) => T;

function describe(value: unknown): string {
  if (value === null) return 'null';
  if (Array.isArray(value)) return 'an array';
  if (typeof value === 'string') return `a string of length ${value.length}`;
  return `${typeof value} ${typeof value === 'number' ? String(value) : ''}`.trim();
}

export function str(maxLength: number, minLength = 0): Check<string> {
  return (v, path) => {
    if (typeof v !== 'string') throw new MessageShapeError(path, `expected a string, got ${describe(v)}`);
    if (v.length < minLength || v.length > maxLength) {
      throw new MessageShapeError(path, `string length ${v.length} outside [${minLength}, ${maxLength}]`);
    }
    return v;
  };
}

export function num(min: number, max: number): Check<number> {
  return (v, path) => {
    if (typeof v !== 'number' || !Number.isFinite(v)) throw new MessageShapeError(path, `expected a finite number, got ${describe(v)}`);
    if (v < min || v > max) throw new MessageShapeError(path, `${v} outside [${min}, ${max}]`);
    return v;
  };
}

export function int(min: number, max: number): Check<number> {
  const n = num(min, max);
  return (v, path) => {
    const x = n(v, path);
    if (!Number.isInteger(x)) throw new MessageShapeError(path, `expected an integer, got ${x}`);
    return x;
  };
}

export function bool(): Check<boolean> {
  return (v, path) => {
    if (typeof v !== 'boolean') throw new MessageShapeError(path, `expected a boolean, got ${describe(v)}`);
    return v;
  };
}

export function literal<const T extends string | number>(...allowed: readonly T[]): Check<T> {
  return (v, path) => {
    if (!allowed.includes(v as T)) throw new MessageShapeError(path, `expected one of ${allowed.join(', ')}, got ${JSON.stringify(v)?.slice(0, 40)}`);
    return v as T;
  };
}

export function arr<T>(item: Check<T>, maxLength: number, minLength = 0): Check<T[]> {
  return (v, path) => {
    if (!Array.isArray(v)) throw new MessageShapeError(path, `expected an array, got ${describe(v)}`);
    if (v.length < minLength || v.length > maxLength) throw new MessageShapeError(path, `array length ${v.length} outside [${minLength}, ${maxLength}]`);
    return v.map((x, i) => item(x, `${path}[${i}]`));
  };
}

/** A fixed-length tuple of one element type (mean and std triples). */
export function tuple3<T>(item: Check<T>): Check<[T, T, T]> {
  const a = arr(item, 3, 3);
  return (v, path) => a(v, path) as [T, T, T];
}

type Fields<T> = { [K in keyof T]-?: Check<T[K]> };
const OPTIONAL = Symbol('optional');
type OptionalCheck<T> = Check<T | undefined> & { [OPTIONAL]: true };

export function opt<T>(check: Check<T>): Check<T | undefined> {
  const c = ((v: unknown, path: string) => (v === undefined ? undefined : check(v, path))) as OptionalCheck<T>;
  c[OPTIONAL] = true;
  return c;
}

/**
 * An object with exactly the listed fields (unknown extra fields are rejected, so a typo on the
 * sending side fails loudly instead of being ignored).
 */
export function obj<T>(fields: Fields<T>): Check<T> {
  const keys = Object.keys(fields) as (keyof T & string)[];
  return (v, path) => {
    if (typeof v !== 'object' || v === null || Array.isArray(v)) throw new MessageShapeError(path, `expected an object, got ${describe(v)}`);
    const rec = v as Record<string, unknown>;
    for (const k of Object.keys(rec)) {
      if (!(k in fields)) throw new MessageShapeError(`${path}.${k}`, 'unexpected field');
    }
    const out = {} as T;
    for (const k of keys) {
      const value = fields[k](rec[k], `${path}.${k}`);
      if (value !== undefined) out[k] = value;
    }
    return out;
  };
}

/** A union discriminated on `type`: picks the member check by the tag, then runs it. */
export function tagged<T extends { type: string }>(members: { [K in T['type']]: Check<Extract<T, { type: K }>> }): Check<T> {
  return (v, path) => {
    if (typeof v !== 'object' || v === null) throw new MessageShapeError(path, `expected a message object, got ${describe(v)}`);
    const tag = (v as { type?: unknown }).type;
    if (typeof tag !== 'string' || !Object.prototype.hasOwnProperty.call(members, tag)) {
      throw new MessageShapeError(`${path}.type`, `unknown message type ${JSON.stringify(tag)?.slice(0, 40)}`);
    }
    return (members as Record<string, Check<T>>)[tag](v, path);
  };
}

/** Adds a cross-field rule on top of a check (e.g. lo <= hi). */
export function refine<T>(check: Check<T>, rule: (value: T) => string | undefined): Check<T> {
  return (v, path) => {
    const x = check(v, path);
    const problem = rule(x);
    if (problem) throw new MessageShapeError(path, problem);
    return x;
  };
}

/** A value or null (a figure that is undefined on this input, sent as JSON null). */
export function nullable<T>(check: Check<T>): Check<T | null> {
  return (v, path) => (v === null ? null : check(v, path));
}

/** An object whose keys are some of `keys` (each optional), every value passing `item`. */
export function partialRecord<K extends string, T>(keys: readonly K[], item: Check<T>): Check<Partial<Record<K, T>>> {
  return (v, path) => {
    if (typeof v !== 'object' || v === null || Array.isArray(v)) throw new MessageShapeError(path, `expected an object, got ${describe(v)}`);
    const out: Partial<Record<K, T>> = {};
    for (const [k, x] of Object.entries(v as Record<string, unknown>)) {
      if (!keys.includes(k as K)) throw new MessageShapeError(`${path}.${k}`, `unexpected key (expected one of ${keys.join(', ')})`);
      out[k as K] = item(x, `${path}.${k}`);
    }
    return out;
  };
}
