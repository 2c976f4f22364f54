/**
 * Seeded mutations of valid models and images. Every mutation is a pure function of (bytes, rng),
 * so a case is reproduced from its seed alone. Model mutations work at two levels: raw bytes
 * (flips, truncation, splices) and protobuf fields (dims, data types, attributes, tensor names,
 * op types, initializer data), the latter producing files that decode and then fail deeper.
 */
import { decodeModelProto, encodeModelProto, ModelProto, NodeProto, TensorProto } from '../../core/model/proto';
import { mulberry32 } from '../../core/metrics/random';

export type Rng = () => number;
export const rngFor = (seed: number): Rng => mulberry32(seed);

const int = (r: Rng, n: number) => Math.floor(r() * n);
const pick = <T>(r: Rng, xs: readonly T[]): T => xs[int(r, xs.length)];

/** Dimension values that break things: zero, negative, one, off by one, huge. */
const DIMS = [0, -1, -7, 1, 2, 3, 7, 1000, 65535, 2 ** 31 - 1, 2 ** 40];
/** Op types a node is swapped to: near relatives, shape changers and ops with no gradient rule. */
const OPS = ['Relu', 'Sigmoid', 'Add', 'Mul', 'Conv', 'MaxPool', 'GlobalAveragePool', 'Flatten', 'Reshape', 'Gemm', 'MatMul', 'Softmax',
  'Transpose', 'Concat', 'Identity', 'BatchNormalization', 'Celu', 'Shape', 'Cast', 'Squeeze', 'ArgMax', 'TopK', 'NonZero', 'Loop', 'If', 'QLinearConv', 'Frobnicate'];
const DATA_TYPES = [0, 1, 2, 3, 6, 7, 8, 9, 10, 11, 16, 17, 23, 99];

// ----- bytes -----

export function flipBytes(b: Uint8Array, r: Rng): Uint8Array {
  const out = Uint8Array.from(b);
  const n = 1 + int(r, 8);
  for (let i = 0; i < n; i++) {
    const at = int(r, out.length);
    out[at] = r() < 0.5 ? out[at] ^ (1 << int(r, 8)) : int(r, 256);
  }
  return out;
}

export function truncate(b: Uint8Array, r: Rng): Uint8Array {
  return b.subarray(0, int(r, b.length));
}

/** Copies a random span over another place: keeps most of the structure while breaking lengths. */
export function splice(b: Uint8Array, r: Rng): Uint8Array {
  const out = Uint8Array.from(b);
  const len = 1 + int(r, 64);
  const from = int(r, Math.max(1, b.length - len));
  const to = int(r, Math.max(1, b.length - len));
  out.set(b.subarray(from, from + len), to);
  return out;
}

// ----- protobuf fields -----

type FieldMutation = (m: ModelProto, r: Rng) => string;

const nodes = (m: ModelProto) => m.graph?.node ?? [];
const inits = (m: ModelProto) => m.graph?.initializer ?? [];
const tensorNames = (m: ModelProto) => [...new Set([...nodes(m).flatMap((n) => [...(n.input ?? []), ...(n.output ?? [])]), ...inits(m).map((t) => t.name ?? '')])];

const FIELD_MUTATIONS: Record<string, FieldMutation> = {
  'input dim': (m, r) => {
    const d = m.graph!.input![0].type!.tensor_type!.shape!.dim!;
    const i = int(r, d.length);
    d[i] = r() < 0.2 ? { dim_param: 'dyn' } : { dim_value: pick(r, DIMS) };
    return `input dim ${i} → ${JSON.stringify(d[i])}`;
  },
  'input rank': (m, r) => {
    const d = m.graph!.input![0].type!.tensor_type!.shape!.dim!;
    if (r() < 0.5) d.pop(); else d.push({ dim_value: 1 + int(r, 4) });
    return `input rank → ${d.length}`;
  },
  'input type': (m, r) => { const t = pick(r, DATA_TYPES); m.graph!.input![0].type!.tensor_type!.elem_type = t; return `input elem_type → ${t}`; },
  'output shape': (m, r) => {
    const o = m.graph!.output![0];
    o.type = { tensor_type: { elem_type: 1, shape: { dim: [{ dim_value: 1 }, { dim_value: pick(r, DIMS) }] } } };
    return `output declared dims changed`;
  },
  'initializer dims': (m, r) => {
    const t = pick(r, inits(m));
    const d = t.dims ?? [];
    if (d.length && r() < 0.7) d[int(r, d.length)] = pick(r, DIMS); else d.push(pick(r, [1, 2, 3]));
    t.dims = d;
    return `initializer '${t.name}' dims → [${d}]`;
  },
  'initializer type': (m, r) => { const t = pick(r, inits(m)); t.data_type = pick(r, DATA_TYPES); return `initializer '${t.name}' data_type → ${t.data_type}`; },
  'initializer data shortened': (m, r) => {
    const t = pick(r, inits(m));
    if (t.raw_data?.length) t.raw_data = t.raw_data.subarray(0, int(r, t.raw_data.length));
    else if (t.float_data?.length) t.float_data = t.float_data.slice(0, int(r, t.float_data.length));
    else if (t.int64_data?.length) t.int64_data = t.int64_data.slice(0, int(r, t.int64_data.length));
    return `initializer '${t.name}' data shortened`;
  },
  'initializer values': (m, r) => {
    // Extreme weights: NaN, Inf and huge values must not break anything either.
    const t = pick(r, inits(m));
    if (t.data_type === 1 && t.raw_data?.length) {
      const f = new Float32Array(Uint8Array.from(t.raw_data).buffer);
      const v = pick(r, [NaN, Infinity, -Infinity, 3e38, 0]);
      for (let i = 0; i < f.length; i++) if (r() < 0.3) f[i] = v;
      t.raw_data = new Uint8Array(f.buffer);
      return `initializer '${t.name}' values → ${v}`;
    }
    if (t.data_type === 7 && t.raw_data?.length) {
      const v = new BigInt64Array(Uint8Array.from(t.raw_data).buffer);
      for (let i = 0; i < v.length; i++) v[i] = BigInt(pick(r, DIMS));
      t.raw_data = new Uint8Array(v.buffer);
      return `int64 initializer '${t.name}' values → extreme`;
    }
    return 'no numeric initializer picked';
  },
  'attribute value': (m, r) => {
    const withAttrs = nodes(m).filter((n) => n.attribute?.length);
    if (!withAttrs.length) return 'no attributes';
    const n = pick(r, withAttrs);
    const a = pick(r, n.attribute!);
    if (a.ints?.length) { a.ints = a.ints.map((v) => (r() < 0.5 ? pick(r, DIMS) : v)); if (r() < 0.3) a.ints.pop(); }
    else if (a.f !== undefined) a.f = pick(r, [NaN, -1, 0, 1e30]);
    else if (a.i !== undefined) a.i = pick(r, DIMS);
    else if (a.s) a.s = new TextEncoder().encode(pick(r, ['', 'nearest', 'cubic', 'SAME_UPPER', 'zzz']));
    else if (a.t) a.t.dims = [pick(r, DIMS)];
    return `${n.op_type} '${n.name}' attribute ${a.name} changed`;
  },
  'attribute removed': (m, r) => {
    const withAttrs = nodes(m).filter((n) => n.attribute?.length);
    if (!withAttrs.length) return 'no attributes';
    const n = pick(r, withAttrs);
    const a = n.attribute!.splice(int(r, n.attribute!.length), 1)[0];
    return `${n.op_type} '${n.name}' attribute ${a.name} removed`;
  },
  'node input renamed': (m, r) => {
    const n = pick(r, nodes(m));
    if (!n.input?.length) return 'no inputs';
    const i = int(r, n.input.length);
    n.input[i] = r() < 0.3 ? `ghost_${int(r, 100)}` : r() < 0.5 ? '' : pick(r, tensorNames(m));
    return `${n.op_type} '${n.name}' input ${i} → '${n.input[i]}'`;
  },
  'node output renamed': (m, r) => {
    const n = pick(r, nodes(m));
    const i = int(r, n.output?.length ?? 1);
    n.output = n.output ?? [];
    n.output[i] = r() < 0.5 ? pick(r, tensorNames(m)) : `renamed_${int(r, 100)}`;
    return `${n.op_type} '${n.name}' output ${i} → '${n.output[i]}'`;
  },
  'node inputs added or dropped': (m, r) => {
    const n = pick(r, nodes(m));
    n.input = n.input ?? [];
    if (r() < 0.5 && n.input.length) n.input.pop(); else n.input.push(pick(r, tensorNames(m)));
    return `${n.op_type} '${n.name}' now has ${n.input.length} inputs`;
  },
  'op type swapped': (m, r) => { const n = pick(r, nodes(m)); const was = n.op_type; n.op_type = pick(r, OPS); return `'${n.name}' ${was} → ${n.op_type}`; },
  'op domain': (m, r) => { const n = pick(r, nodes(m)); n.domain = pick(r, ['com.microsoft', 'ai.onnx.ml', 'com.example', 'ai.onnx']); return `'${n.name}' domain → ${n.domain}`; },
  'node removed': (m, r) => { const ns = nodes(m); const n = ns.splice(int(r, ns.length), 1)[0]; return `removed ${n.op_type} '${n.name}'`; },
  'node duplicated': (m, r) => { const ns = nodes(m); const n = pick(r, ns); ns.splice(int(r, ns.length), 0, structuredClone(n) as NodeProto); return `duplicated ${n.op_type} '${n.name}'`; },
  'nodes reordered': (m, r) => { const ns = nodes(m); for (let i = ns.length - 1; i > 0; i--) { const j = int(r, i + 1); [ns[i], ns[j]] = [ns[j], ns[i]]; } return 'nodes shuffled'; },
  'opset': (m, r) => { const v = pick(r, [0, 1, 10, 11, 13, 18, 21, 22, 99]); m.opset_import = [{ domain: '', version: v }]; return `opset → ${v}`; },
  'ir version': (m, r) => { m.ir_version = pick(r, [0, 2, 3, 7, 10, 11, 99]); return `ir_version → ${m.ir_version}`; },
  'graph output renamed': (m, r) => { m.graph!.output![0].name = pick(r, [...tensorNames(m), 'nowhere']); return `output → '${m.graph!.output![0].name}'`; },
  'initializer removed': (m, r) => { const t = inits(m).splice(int(r, inits(m).length), 1)[0] as TensorProto; return `removed initializer '${t.name}'`; },
  'external data': (m, r) => {
    const t = pick(r, inits(m));
    t.raw_data = undefined;
    t.data_location = 1;
    t.external_data = [{ key: 'location', value: pick(r, ['missing.bin', '../up.bin', '/etc/hostname', '', 'sub/../../x']) }, { key: 'offset', value: pick(r, ['0', '-4', '1e99', 'x']) }];
    return `initializer '${t.name}' → external ${t.external_data[0].value}`;
  },
};

export const MODEL_MUTATIONS = ['bytes: flip', 'bytes: truncate', 'bytes: splice', ...Object.keys(FIELD_MUTATIONS).map((k) => `field: ${k}`)];

/** One mutation (or, one time in four, two field mutations) of a valid model. */
export function mutateModel(bytes: Uint8Array, r: Rng): { bytes: Uint8Array; what: string } {
  const kind = pick(r, MODEL_MUTATIONS);
  if (kind === 'bytes: flip') return { bytes: flipBytes(bytes, r), what: kind };
  if (kind === 'bytes: truncate') return { bytes: truncate(bytes, r), what: kind };
  if (kind === 'bytes: splice') return { bytes: splice(bytes, r), what: kind };
  const m = decodeModelProto(bytes);
  try {
    const done = [FIELD_MUTATIONS[kind.slice(7)](m, r)];
    if (r() < 0.25) done.push(FIELD_MUTATIONS[pick(r, Object.keys(FIELD_MUTATIONS))](m, r));
    return { bytes: encodeModelProto(m), what: `${kind}: ${done.join('; ')}` };
  } catch (e) {
    // A mutation with nothing to act on (an emptied list) or a value protobuf cannot encode.
    return { bytes: flipBytes(bytes, r), what: `bytes: flip (after ${kind} failed: ${(e as Error).message})` };
  }
}

// ----- images -----

export const IMAGE_MUTATIONS = ['bytes: flip', 'bytes: truncate', 'bytes: splice', 'header: dims', 'header: fields'];

/** Edits the fields of an image header by format: PNG IHDR, GIF logical screen, JPEG SOF, WebP VP8X/VP8L, TIFF IFD (byte offsets from each spec, from memory). */
function editHeader(b: Uint8Array, r: Rng, dims: boolean): Uint8Array {
  const out = Uint8Array.from(b);
  const v = new DataView(out.buffer);
  const big = [0, 1, 0xffff, 0x7fffffff, 0xffffffff, 40000];
  if (out[0] === 0x89 && out[1] === 0x50) { // PNG: IHDR data at 16: width, height (u32 BE), depth, colour type, compression, filter, interlace
    if (dims) { v.setUint32(16, pick(r, big)); v.setUint32(20, pick(r, big)); } else out[24 + int(r, 5)] = pick(r, [0, 1, 2, 3, 4, 6, 7, 16, 255]);
  } else if (out[0] === 0x47 && out[1] === 0x49) { // GIF: logical screen width/height (u16 LE) at 6, packed fields at 10
    if (dims) { v.setUint16(6, pick(r, [0, 1, 0xffff]), true); v.setUint16(8, pick(r, [0, 1, 0xffff]), true); } else out[10] = int(r, 256);
  } else if (out[0] === 0xff && out[1] === 0xd8) { // JPEG: find SOFn, edit height/width (u16 BE) or components
    for (let i = 2; i + 9 < out.length; i++) {
      if (out[i] === 0xff && out[i + 1] >= 0xc0 && out[i + 1] <= 0xc2) {
        if (dims) { v.setUint16(i + 5, pick(r, [0, 1, 0xffff])); v.setUint16(i + 7, pick(r, [0, 1, 0xffff])); } else out[i + 4 + int(r, 6)] = int(r, 256);
        break;
      }
    }
  } else if (out[0] === 0x52 && out[1] === 0x49) { // RIFF/WebP: bytes after the chunk header hold the size fields
    for (let i = 0; i < 6; i++) out[20 + int(r, 12)] = int(r, 256);
  } else { // TIFF or anything else: scribble over the first bytes after the magic
    for (let i = 0; i < 6; i++) out[4 + int(r, Math.min(60, out.length - 4))] = int(r, 256);
  }
  return out;
}

export function mutateImage(bytes: Uint8Array, r: Rng): { bytes: Uint8Array; what: string } {
  const kind = pick(r, IMAGE_MUTATIONS);
  if (kind === 'bytes: flip') return { bytes: flipBytes(bytes, r), what: kind };
  if (kind === 'bytes: truncate') return { bytes: truncate(bytes, r), what: kind };
  if (kind === 'bytes: splice') return { bytes: splice(bytes, r), what: kind };
  return { bytes: editHeader(bytes, r, kind === 'header: dims'), what: kind };
}
