/**
 * Bad models, made in the test from the valid demo model (test-fixtures/parts/parts-sorter.onnx)
 * by protobuf edits, so almost nothing is committed. Each case writes its files into a folder and
 * names the patterns its one-line error must match: which file, which node/op/tensor, what to do.
 */
import { mkdirSync, readFileSync, symlinkSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import * as zlib from 'node:zlib';
import { decodeModelProto, encodeModelProto, ModelProto, NodeProto, TensorProto, TensorType, ValueInfoProto } from '../../../core/model/proto';
import { FIXTURES } from '../../helpers';

export const DEMO_MODEL = path.join(FIXTURES, 'parts/parts-sorter.onnx');

export interface BadModelCase {
  name: string;
  /** Writes the model (and any side files) into `dir`; returns the model path. */
  make(dir: string): string;
  /** Patterns the one-line message must match, besides the file name. */
  expect: RegExp[];
}

let demoBytes: Buffer | undefined;
/** A fresh decoded copy of the demo model. */
export function demoProto(): ModelProto {
  demoBytes ??= readFileSync(DEMO_MODEL);
  return decodeModelProto(demoBytes);
}

export const floatInput = (name: string, dims: (number | string)[], elemType: number = TensorType.FLOAT): ValueInfoProto => ({
  name, type: { tensor_type: { elem_type: elemType, shape: { dim: dims.map((d) => (typeof d === 'number' ? { dim_value: d } : { dim_param: d })) } } },
});

const f32 = (name: string, dims: number[], values: number[]): TensorProto =>
  ({ name, dims, data_type: TensorType.FLOAT, raw_data: new Uint8Array(Float32Array.from(values).buffer) });
const scalarTensor = (name: string, type: number, value: number): TensorProto =>
  type === TensorType.FLOAT ? f32(name, [], [value]) : { name, dims: [], data_type: type, raw_data: Uint8Array.of(value) };

/** A small valid graph builder: image [1,3,8,8] → ops → output; for cases the demo cannot host. */
export function tinyModel(nodes: NodeProto[], inits: TensorProto[], output: ValueInfoProto, opts: { input?: ValueInfoProto[]; opset?: { domain?: string; version?: number }[] } = {}): ModelProto {
  return {
    ir_version: 8,
    opset_import: opts.opset ?? [{ domain: '', version: 17 }],
    producer_name: 'factfoil-bad-inputs',
    graph: { name: 'g', node: nodes, initializer: inits, input: opts.input ?? [floatInput('image', [1, 3, 8, 8])], output: [output] },
  };
}

function write(dir: string, name: string, bytes: Uint8Array | string): string {
  const file = path.join(dir, name);
  writeFileSync(file, bytes);
  return file;
}
const save = (dir: string, name: string, m: ModelProto) => write(dir, name, encodeModelProto(m));

/** Mutates a fresh demo copy and saves it. */
function edited(name: string, edit: (m: ModelProto) => void): (dir: string) => string {
  return (dir) => { const m = demoProto(); edit(m); return save(dir, name, m); };
}

const nodesOf = (m: ModelProto) => m.graph!.node!;
const nodeNamed = (m: ModelProto, name: string) => nodesOf(m).find((n) => n.name === name)!;

/** A tiny PNG, for "a PNG renamed .onnx". */
function tinyPng(): Buffer {
  const chunk = (type: string, data: Buffer) => {
    const len = Buffer.alloc(4); len.writeUInt32BE(data.length);
    const td = Buffer.concat([Buffer.from(type, 'latin1'), data]);
    const crc = Buffer.alloc(4); crc.writeUInt32BE(zlib.crc32(td) >>> 0);
    return Buffer.concat([len, td, crc]);
  };
  const ihdr = Buffer.alloc(13); ihdr.writeUInt32BE(2, 0); ihdr.writeUInt32BE(2, 4); ihdr[8] = 8; ihdr[9] = 2;
  return Buffer.concat([Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]), chunk('IHDR', ihdr), chunk('IDAT', zlib.deflateSync(Buffer.alloc(14))), chunk('IEND', Buffer.alloc(0))]);
}

/** Seeded bytes (mulberry32-like LCG; any fixed generator will do). */
function randomBytes(n: number, seed: number): Buffer {
  const out = Buffer.alloc(n);
  let s = seed >>> 0;
  for (let i = 0; i < n; i++) { s = (Math.imul(s, 1664525) + 1013904223) >>> 0; out[i] = s >>> 24; }
  return out;
}

/** The demo with one initializer moved to an external data file at `location` (written when `data`). */
function externalData(name: string, location: string, opts: { data?: boolean; offset?: number; linkTo?: string } = {}): (dir: string) => string {
  return (dir) => {
    const m = demoProto();
    const t = m.graph!.initializer!.find((x) => x.name === 'head.weight')!;
    const bytes = t.raw_data!;
    if (opts.data) { mkdirSync(path.dirname(path.join(dir, location)), { recursive: true }); writeFileSync(path.join(dir, location), bytes); }
    if (opts.linkTo) symlinkSync(opts.linkTo, path.join(dir, location));
    t.raw_data = undefined;
    t.data_location = 1;
    t.external_data = [{ key: 'location', value: location }, ...(opts.offset !== undefined ? [{ key: 'offset', value: String(opts.offset) }] : [])];
    return save(dir, name, m);
  };
}

export function badModelCases(): BadModelCase[] {
  const demoLen = () => { demoBytes ??= readFileSync(DEMO_MODEL); return demoBytes.length; };
  const cases: BadModelCase[] = [
    // Not a model at all.
    { name: 'empty file', make: (d) => write(d, 'empty.onnx', ''), expect: [/is empty \(0 bytes\)/] },
    { name: 'truncated to half', make: (d) => write(d, 'half.onnx', readFileSync(DEMO_MODEL).subarray(0, demoLen() >> 1)), expect: [/is not an ONNX model \(protobuf decoding failed/, /truncated/] },
    { name: 'truncated to 40 bytes', make: (d) => write(d, 'cut40.onnx', readFileSync(DEMO_MODEL).subarray(0, 40)), expect: [/holds no ONNX graph/] },
    { name: 'random bytes', make: (d) => write(d, 'noise.onnx', randomBytes(4096, 7)), expect: [/is not an ONNX model \(protobuf decoding failed/] },
    { name: 'a PNG renamed .onnx', make: (d) => write(d, 'picture.onnx', tinyPng()), expect: [/is a PNG image, not an ONNX model/, /export the model to ONNX/] },
    { name: 'a JSON file renamed .onnx', make: (d) => write(d, 'config.onnx', '{"format": "factfoil-model/1"}\n'), expect: [/is a JSON text file, not an ONNX model/] },
    { name: 'a folder named .onnx', make: (d) => { const f = path.join(d, 'dir.onnx'); mkdirSync(f); return f; }, expect: [/is a folder/] },
    { name: 'missing file', make: (d) => path.join(d, 'absent.onnx'), expect: [/cannot read model .*absent\.onnx: no such file/] },

    // Protobuf that decodes, to nonsense.
    { name: 'no graph', make: (d) => save(d, 'nograph.onnx', { ir_version: 8, opset_import: [{ version: 17 }] }), expect: [/holds no ONNX graph/] },
    { name: 'graph without nodes', make: edited('nonodes.onnx', (m) => { m.graph!.node = []; }), expect: [/holds no ONNX graph/] },
    { name: 'no inputs', make: edited('noinputs.onnx', (m) => { m.graph!.input = []; }), expect: [/Conv node '\/stem\/stem\.0\/Conv' reads tensor 'image', which nothing produces/] },
    { name: 'no outputs', make: edited('nooutputs.onnx', (m) => { m.graph!.output = []; }), expect: [/declares no output/] },
    { name: 'output nothing produces', make: edited('ghostout.onnx', (m) => { m.graph!.output![0].name = 'phantom'; }), expect: [/graph output 'phantom' is produced by no node/] },
    { name: 'dangling tensor name', make: edited('dangling.onnx', (m) => { nodeNamed(m, '/stages.1/conv1/Conv').input![0] = 'stage1_typo'; }), expect: [/Conv node '\/stages\.1\/conv1\/Conv' reads tensor 'stage1_typo', which nothing produces/] },
    { name: 'cycle', make: edited('cycle.onnx', (m) => { nodeNamed(m, '/stages.0/conv1/Conv').input![0] = 'stage2'; }), expect: [/cycle through .*node '\/stages\.0/] },
    { name: 'tensor produced twice', make: edited('twice.onnx', (m) => { nodeNamed(m, '/stages.0/conv1/Conv').output![0] = '/stem/stem.0/Conv_output_0'; }), expect: [/tensor '\/stem\/stem\.0\/Conv_output_0' is produced twice/] },
    { name: 'node without op type', make: edited('noop.onnx', (m) => { nodeNamed(m, '/stem/stem.2/Relu').op_type = ''; }), expect: [/node '\/stem\/stem\.2\/Relu' has no op type/] },
    { name: 'unknown op in the default domain', make: edited('unknownop.onnx', (m) => { nodeNamed(m, '/stem/stem.2/Relu').op_type = 'Frobnicate'; }), expect: [/onnxruntime cannot load .*: Frobnicate node '\/stem\/stem\.2\/Relu': No Op registered for Frobnicate/] },

    // Shapes.
    { name: 'zero input dim', make: edited('zerodim.onnx', (m) => { m.graph!.input![0].type!.tensor_type!.shape!.dim![2] = { dim_value: 0 }; }), expect: [/input 'image' \[1,3,0,112\]: dimension 2 is 0/, /named dynamic axis/] },
    { name: 'negative input dim', make: edited('negdim.onnx', (m) => { m.graph!.input![0].type!.tensor_type!.shape!.dim![3] = { dim_value: -5 }; }), expect: [/input 'image' \[1,3,112,-5\]: dimension 3 is -5/] },
    { name: 'huge input dims', make: edited('hugedim.onnx', (m) => { const d = m.graph!.input![0].type!.tensor_type!.shape!.dim!; d[2] = { dim_value: 6000 }; d[3] = { dim_value: 6000 }; }), expect: [/input 'image' \[1,3,6000,6000\] is too large \(1\.08e\+8 values/] },
    { name: 'absurdly long input side', make: edited('longside.onnx', (m) => { m.graph!.input![0].type!.tensor_type!.shape!.dim![3] = { dim_value: 65535 }; }), expect: [/input 'image' \[1,3,112,65535\]: dimension 3 is 65535, over the 8192/] },
    { name: 'initializer with fewer values than its shape', make: edited('shortinit.onnx', (m) => { const t = m.graph!.initializer!.find((x) => x.name === 'head.weight')!; t.raw_data = t.raw_data!.subarray(0, t.raw_data!.length - 64); }), expect: [/initializer 'head\.weight' holds 3008 bytes of data, but its shape \[8,96\] of float32 needs 3072/] },
    { name: 'raw_data not a whole number of elements', make: edited('oddraw.onnx', (m) => { const t = m.graph!.initializer!.find((x) => x.name === 'head.bias')!; t.raw_data = t.raw_data!.subarray(0, 30); }), expect: [/initializer 'head\.bias' holds 30 bytes of data, but its shape \[8\] of float32 needs 32/] },
    { name: 'initializer with a negative dim', make: edited('neginit.onnx', (m) => { m.graph!.initializer!.find((x) => x.name === 'head.bias')!.dims = [-8]; }), expect: [/initializer 'head\.bias' has an invalid shape \[-8\]/] },
    { name: 'initializer of unknown data type', make: edited('typeinit.onnx', (m) => { m.graph!.initializer!.find((x) => x.name === 'head.bias')!.data_type = 99; }), expect: [/initializer 'head\.bias' has data type 99, which is not an ONNX tensor type/] },

    // Versions and domains.
    { name: 'IR version newer than supported', make: edited('ir11.onnx', (m) => { m.ir_version = 11; }), expect: [/IR version 11 is outside the supported 3–10/] },
    { name: 'opset newer than supported', make: edited('opset23.onnx', (m) => { m.opset_import = [{ domain: '', version: 23 }]; }), expect: [/opset 23 is outside the supported 7–21/, /opset_version/] },
    { name: 'no default-domain opset', make: edited('noopset.onnx', (m) => { m.opset_import = [{ domain: 'com.example', version: 1 }]; }), expect: [/imports no default-domain ONNX opset/] },
    {
      name: 'custom op in a non-default domain',
      make: edited('custom.onnx', (m) => { const n = nodeNamed(m, '/stem/stem.2/Relu'); n.op_type = 'FancyActivation'; n.domain = 'com.example.vision'; m.opset_import!.push({ domain: 'com.example.vision', version: 1 }); }),
      expect: [/FancyActivation node '\/stem\/stem\.2\/Relu'.*domain 'com\.example\.vision'/, /custom/],
    },

    // Quantized (QOperator form): QuantizeLinear → QLinearConv → Flatten → DequantizeLinear → Gemm; valid ONNX that onnxruntime runs.
    {
      name: 'quantized graph (QLinearConv)',
      make: (d) => save(d, 'quantized.onnx', tinyModel([
        { op_type: 'QuantizeLinear', name: 'quant_in', input: ['image', 'xs', 'xz'], output: ['xq'] },
        { op_type: 'QLinearConv', name: 'qconv1', input: ['xq', 'xs', 'xz', 'wq', 'ws', 'wz', 'ys', 'yz'], output: ['yq'], attribute: [{ name: 'pads', type: 7, ints: [1, 1, 1, 1] }] },
        { op_type: 'Flatten', name: 'flat', input: ['yq'], output: ['fq'] },
        { op_type: 'DequantizeLinear', name: 'dequant', input: ['fq', 'ys', 'yz'], output: ['f'] },
        { op_type: 'Gemm', name: 'fc', input: ['f', 'w', 'b'], output: ['logits'], attribute: [{ name: 'transB', type: 2, i: 1 }] },
      ], [
        scalarTensor('xs', TensorType.FLOAT, 0.02), scalarTensor('xz', TensorType.UINT8, 128),
        { name: 'wq', dims: [4, 3, 3, 3], data_type: TensorType.UINT8, raw_data: Uint8Array.from({ length: 108 }, (_, i) => 100 + (i % 50)) },
        scalarTensor('ws', TensorType.FLOAT, 0.01), scalarTensor('wz', TensorType.UINT8, 125),
        scalarTensor('ys', TensorType.FLOAT, 0.05), scalarTensor('yz', TensorType.UINT8, 128),
        f32('w', [3, 256], Array.from({ length: 768 }, (_, i) => Math.cos(i))), f32('b', [3], [0, 0, 0]),
      ], floatInput('logits', [1, 3]))),
      expect: [/is quantized/, /QuantizeLinear node 'quant_in'/, /float model/],
    },

    // Inputs.
    {
      name: 'two image inputs',
      make: (d) => save(d, 'two.onnx', tinyModel([
        { op_type: 'Add', name: 'sum', input: ['image', 'other'], output: ['s'] },
        { op_type: 'GlobalAveragePool', name: 'gap', input: ['s'], output: ['p'] },
        { op_type: 'Flatten', name: 'flat', input: ['p'], output: ['logits'] },
      ], [], floatInput('logits', [1, 3]), { input: [floatInput('image', [1, 3, 8, 8]), floatInput('other', [1, 3, 8, 8])] })),
      expect: [/2 inputs \(image, other\)/, /one image input/],
    },
    {
      name: 'uint8 image input',
      make: edited('uint8.onnx', (m) => { m.graph!.input![0].type!.tensor_type!.elem_type = TensorType.UINT8; }),
      expect: [/input 'image' is not a float image tensor \(uint8, shape \[1,3,112,112\]\)/, /float32/],
    },
    {
      name: 'rank-2 input',
      make: edited('rank2.onnx', (m) => { m.graph!.input![0].type!.tensor_type!.shape!.dim = [{ dim_value: 1 }, { dim_value: 37632 }]; }),
      expect: [/input 'image' is not a float image tensor.*\[1,37632\]/],
    },

    // Heads and layers.
    {
      name: 'no spatial layer (a linear model on the pixels)',
      make: (d) => save(d, 'linear.onnx', tinyModel([
        { op_type: 'Flatten', name: 'flat', input: ['image'], output: ['f'] },
        { op_type: 'Gemm', name: 'fc', input: ['f', 'w', 'b'], output: ['logits'], attribute: [{ name: 'transB', type: 2, i: 1 }] },
      ], [f32('w', [4, 192], Array.from({ length: 768 }, (_, i) => Math.sin(i))), f32('b', [4], [0, 0, 0, 0])], floatInput('logits', [1, 4]))),
      expect: [/has no layer with a spatial grid between its input and its scores \(ops: Flatten, Gemm\)/],
    },
    {
      name: 'scores not a class vector (a feature map output)',
      make: edited('featuremap.onnx', (m) => { m.graph!.output = [floatInput('stage4', [1, 96, 7, 7])]; }),
      expect: [/output 'stage4' has shape \[1,96,\d+,\d+\], not a vector of class scores/],
    },
    {
      name: 'scores with a single class',
      make: (d) => save(d, 'oneclass.onnx', tinyModel([
        { op_type: 'Conv', name: 'c', input: ['image', 'w'], output: ['a'] },
        { op_type: 'GlobalAveragePool', name: 'gap', input: ['a'], output: ['p'] },
        { op_type: 'Flatten', name: 'flat', input: ['p'], output: ['logits'] },
      ], [f32('w', [1, 3, 3, 3], Array(27).fill(0.1))], floatInput('logits', [1, 1]))),
      expect: [/shape \[1,1\], not a vector of class scores/],
    },

    // External data.
    { name: 'external data missing', make: externalData('extmissing.onnx', 'weights.bin'), expect: [/external data file 'weights\.bin' for initializer 'head\.weight' is missing/] },
    { name: 'external data outside the folder', make: externalData('extout.onnx', '../weights.bin'), expect: [/'head\.weight' points outside the model's folder \(\.\.\/weights\.bin\)/] },
    { name: 'external data at an absolute path', make: externalData('extabs.onnx', '/etc/passwd'), expect: [/points outside the model's folder \(\/etc\/passwd\)/] },
    { name: 'external data linked outside the folder', make: externalData('extlink.onnx', 'linked.bin', { linkTo: '/etc/hostname' }), expect: [/'linked\.bin' links outside the model's folder/] },
    { name: 'external data beyond the end of its file', make: externalData('extshort.onnx', 'w.bin', { data: true, offset: 100000 }), expect: [/external data for 'head\.weight' lies beyond the end of w\.bin/] },
    { name: 'external data file of the wrong length', make: (d) => { const f = externalData('extlen.onnx', 'w2.bin', { data: true })(d); writeFileSync(path.join(d, 'w2.bin'), Buffer.alloc(100)); return f; }, expect: [/initializer 'head\.weight' holds 100 bytes of data/] },
  ];
  return cases;
}
