/**
 * The Conv input gradient in the geometries the flipped-kernel form must get right (stride 1
 * with asymmetric pads, groups with C_in ≠ C_out, depthwise multipliers, dilation, 1-D and 3-D,
 * auto_pad), and the strided ConvTranspose form (pads, kernels, strides 2–3, groups, dilation,
 * 1-D to 3-D); the bench's polyphase form (test/bench/polyphase-conv.ts) is held to the same
 * reference so its timings compare exact graphs. Reference: the adjoint of the ONNX Conv
 * definition, y[co,o] = Σ_{ci∈group, t} W[co,ci,t]·x[ci, o·s − p_begin + t·d], evaluated
 * in float64 plain loops here: ∂(Σ g·y)/∂x[ci,i] = Σ g[co,o]·W[co,ci,t] over the taps that read i.
 */
import { strict as assert } from 'node:assert';
import { Engine } from '../../../../core/engine/engine';
import { gradientsAt } from '../../../../core/methods/gradient';
import { modelFromBytes } from '../../../../core/model/load';
import { encodeModelProto, TensorType } from '../../../../core/model/proto';
import { floatTensor } from '../../../../core/model/tensor';
import { composePlan } from '../../../../core/plan/compose';
import { decodeModelProto } from '../../../../core/model/proto';
import { mulberry32 } from '../../../../core/metrics/random';
import { relL2 } from '../../../helpers';
import { gradientRules } from '../../../../core/autodiff/rules';
import { polyphaseConv } from '../../../bench/polyphase-conv';
import { withRules } from '../../../bench/rule-swap';

interface ConvCase {
  name: string; x: number[]; w: number[]; strides?: number[]; pads?: number[]; dilations?: number[]; group?: number; autoPad?: string;
}

const CASES: ConvCase[] = [
  { name: '3x3 stride 1, asymmetric pads [0,2,1,0]', x: [1, 3, 6, 7], w: [4, 3, 3, 3], pads: [0, 2, 1, 0] },
  { name: 'group 2 with 4 in, 6 out channels, pads 1', x: [1, 4, 5, 5], w: [6, 2, 3, 3], pads: [1, 1, 1, 1], group: 2 },
  { name: 'depthwise, channel multiplier 2, stride 1, pads 1', x: [1, 3, 5, 6], w: [6, 1, 3, 3], pads: [1, 1, 1, 1], group: 3 },
  { name: '3x3 dilation 2, pads [1,2,2,1]', x: [1, 2, 7, 7], w: [3, 2, 3, 3], dilations: [2, 2], pads: [1, 2, 2, 1] },
  { name: '5x3 kernel, no pads', x: [1, 2, 8, 6], w: [2, 2, 5, 3] },
  { name: '1-D, kernel 3, pads [2,0]', x: [1, 2, 9], w: [3, 2, 3], pads: [2, 0] },
  { name: '3-D, kernel 2x3x3, pads 1', x: [1, 2, 4, 5, 5], w: [2, 2, 2, 3, 3], pads: [1, 1, 1, 1, 1, 1] },
  { name: 'auto_pad SAME_LOWER, kernel 4', x: [1, 2, 6, 6], w: [3, 2, 4, 4], autoPad: 'SAME_LOWER' },
  { name: 'stride 2, 3x3, pads 1, odd input', x: [1, 3, 7, 7], w: [4, 3, 3, 3], strides: [2, 2], pads: [1, 1, 1, 1] },
  { name: 'stride 2, 3x3, pads 1, even input', x: [1, 3, 8, 8], w: [5, 3, 3, 3], strides: [2, 2], pads: [1, 1, 1, 1] },
  { name: 'stride 2, 1x1, no pads (a downsampling shortcut)', x: [1, 4, 8, 7], w: [6, 4, 1, 1], strides: [2, 2] },
  { name: 'stride 2, 4x4, asymmetric pads [2,1,0,1]', x: [1, 2, 9, 8], w: [3, 2, 4, 4], strides: [2, 2], pads: [2, 1, 0, 1] },
  { name: 'stride 3, 5x5, pads 2', x: [1, 2, 11, 10], w: [3, 2, 5, 5], strides: [3, 3], pads: [2, 2, 2, 2] },
  { name: 'stride 2, 7x7, pads 3 (a stem conv)', x: [1, 3, 16, 16], w: [4, 3, 7, 7], strides: [2, 2], pads: [3, 3, 3, 3] },
  { name: 'stride 2 depthwise', x: [1, 4, 7, 7], w: [4, 1, 3, 3], strides: [2, 2], pads: [1, 1, 1, 1], group: 4 },
  { name: 'stride 2 dilation 2', x: [1, 2, 9, 9], w: [3, 2, 3, 3], strides: [2, 2], pads: [2, 2, 2, 2], dilations: [2, 2] },
  { name: 'strides [2,1]', x: [1, 2, 8, 6], w: [3, 2, 3, 3], strides: [2, 1], pads: [1, 1, 1, 1] },
  { name: 'stride 3 dilation 2, pads [1,3,2,0]', x: [1, 2, 13, 11], w: [3, 2, 3, 3], strides: [3, 3], pads: [1, 3, 2, 0], dilations: [2, 2] },
  { name: 'stride 3 group 2, 4x4, pads 1', x: [1, 4, 10, 12], w: [6, 2, 4, 4], strides: [3, 3], pads: [1, 1, 1, 1], group: 2 },
  { name: 'stride 3, 2x2 (a phase with no taps), pads 0', x: [1, 2, 9, 9], w: [3, 2, 2, 2], strides: [3, 3] },
  { name: 'stride 2 dilation 3, 1-D, pads [4,1]', x: [1, 2, 15], w: [2, 2, 3], strides: [2], pads: [4, 1], dilations: [3] },
  { name: '3-D stride 2, kernel 3, pads 1', x: [1, 2, 5, 6, 6], w: [3, 2, 3, 3, 3], strides: [2, 2, 2], pads: [1, 1, 1, 1, 1, 1] },
  { name: 'auto_pad SAME_UPPER stride 2, kernel 3', x: [1, 2, 7, 8], w: [3, 2, 3, 3], strides: [2, 2], autoPad: 'SAME_UPPER' },
  { name: 'stride 2, pads beyond the kernel (g cropped per phase)', x: [1, 2, 6, 6], w: [3, 2, 3, 3], strides: [2, 2], pads: [3, 3, 3, 3] },
  { name: 'stride 1, pads beyond the kernel (g cropped)', x: [1, 2, 5, 5], w: [3, 2, 2, 2], pads: [2, 2, 2, 2] },
  { name: 'stride 2, 1x1, pads 2 (g cropped, odd phases get nothing)', x: [1, 1, 2, 2], w: [1, 1, 1, 1], strides: [2, 2], pads: [2, 2, 2, 2] },
];

const prod = (d: number[]) => d.reduce((a, b) => a * b, 1);

function convModel(c: ConvCase, w: Float32Array, yDims: number[]): Uint8Array {
  const attrs = [
    ...(c.strides ? [{ name: 'strides', type: 7, ints: c.strides }] : []),
    ...(c.pads ? [{ name: 'pads', type: 7, ints: c.pads }] : []),
    ...(c.dilations ? [{ name: 'dilations', type: 7, ints: c.dilations }] : []),
    ...(c.group ? [{ name: 'group', type: 2, i: c.group }] : []),
    ...(c.autoPad ? [{ name: 'auto_pad', type: 3, s: new TextEncoder().encode(c.autoPad) }] : []),
  ];
  const vi = (name: string, dims: number[]) => ({ name, type: { tensor_type: { elem_type: TensorType.FLOAT, shape: { dim: dims.map((d) => ({ dim_value: d })) } } } });
  return encodeModelProto({
    ir_version: 8, opset_import: [{ domain: '', version: 18 }],
    graph: {
      name: 'conv', node: [{ op_type: 'Conv', name: 'conv', input: ['x', 'w'], output: ['y'], attribute: attrs as never }],
      initializer: [floatTensor('w', c.w, w)], input: [vi('x', c.x)], output: [vi('y', yDims)],
    },
  });
}

/** Explicit pads per the ONNX Conv spec (auto_pad resolved), begin then end. */
function padsOf(c: ConvCase, n: number): number[] {
  if (!c.autoPad) return c.pads ?? new Array(2 * n).fill(0);
  const begin: number[] = [], end: number[] = [];
  for (let i = 0; i < n; i++) {
    const s = c.strides?.[i] ?? 1, d = c.dilations?.[i] ?? 1, k = c.w[2 + i], size = c.x[2 + i];
    const total = Math.max(0, (Math.ceil(size / s) - 1) * s + (k - 1) * d + 1 - size);
    const small = Math.floor(total / 2);
    begin.push(c.autoPad === 'SAME_UPPER' ? small : total - small);
    end.push(c.autoPad === 'SAME_UPPER' ? total - small : small);
  }
  return [...begin, ...end];
}

/** Float64 adjoint of the ONNX Conv definition: ∂(Σ g·y)/∂x, and the output shape. */
function referenceInputGradient(c: ConvCase, w: Float32Array, g: (i: number) => number): { yDims: number[]; gx: Float64Array } {
  const n = c.x.length - 2;
  const s = c.strides ?? new Array(n).fill(1), d = c.dilations ?? new Array(n).fill(1), p = padsOf(c, n);
  const group = c.group ?? 1, [cout, cinG, ...k] = c.w, cin = c.x[1];
  const xs = c.x.slice(2);
  const ys = xs.map((size, i) => Math.floor((size + p[i] + p[i + n] - ((k[i] - 1) * d[i] + 1)) / s[i]) + 1);
  const gx = new Float64Array(prod(c.x));
  const unravel = (idx: number, dims: number[]) => { const out = new Array(dims.length); for (let i = dims.length - 1; i >= 0; i--) { out[i] = idx % dims[i]; idx = Math.floor(idx / dims[i]); } return out; };
  const ravel = (ix: number[], dims: number[]) => ix.reduce((a, v, i) => a * dims[i] + v, 0);
  for (let co = 0; co < cout; co++) {
    const grp = Math.floor(co / (cout / group));
    for (let oi = 0; oi < prod(ys); oi++) {
      const o = unravel(oi, ys), gv = g(co * prod(ys) + oi);
      for (let cl = 0; cl < cinG; cl++) for (let ti = 0; ti < prod(k); ti++) {
        const t = unravel(ti, k);
        const pos = o.map((ov, i) => ov * s[i] - p[i] + t[i] * d[i]);
        if (pos.some((v, i) => v < 0 || v >= xs[i])) continue;
        const ci = grp * cinG + cl;
        gx[ci * prod(xs) + ravel(pos, xs)] += gv * w[(co * cinG + cl) * prod(k) + ti];
      }
    }
  }
  assert.equal(cin, group * cinG);
  return { yDims: [1, cout, ...ys], gx };
}

for (const form of ['product', 'polyphase'] as const) {
  describe(form === 'product'
    ? 'Conv input gradient (flipped-kernel Conv at stride 1, ConvTranspose otherwise) vs the adjoint of the ONNX Conv definition'
    : 'Conv input gradient, the bench\'s polyphase form (stride-1 Conv per output phase) vs the adjoint of the ONNX Conv definition', () => {
    const engine = new Engine();
    after(() => engine.dispose());
    for (const c of CASES) {
      it(c.name, async () => {
        const rand = mulberry32(c.name.length * 7919);
        const w = Float32Array.from({ length: prod(c.w) }, () => rand() - 0.5);
        const x = Float32Array.from({ length: prod(c.x) }, () => rand() * 2 - 1);
        const probe = referenceInputGradient(c, w, () => 0);
        const R = prod(probe.yDims);
        const seed = Float32Array.from({ length: R }, () => rand() * 2 - 1);
        const ref = referenceInputGradient(c, w, (i) => seed[i]).gx;
        const model = modelFromBytes(convModel(c, w, probe.yDims), `${c.name}.onnx`, { anyInput: true });
        const pm = await engine.prepare(model, c.x, { anyScores: true });
        const strided = (c.strides ?? []).some((v) => v > 1);
        // At stride 1, pads beyond (k−1)·d leave the flipped-kernel Conv a negative pad, so both forms keep ConvTranspose there.
        const nd = c.x.length - 2;
        const padBeyond = (c.pads ?? []).some((p, i) => p > (c.w[2 + (i % nd)] - 1) * (c.dilations?.[i % nd] ?? 1));
        await withRules({ Conv: form === 'product' ? gradientRules.Conv : polyphaseConv }, async () => {
          const got = (await gradientsAt(engine, pm, x, ['x'], { base: seed, coef: new Float32Array(1), k: 1 })).get('x')!.data;
          assert.ok(relL2(got, ref) < 1e-5, `rel L2 ${relL2(got, ref)}`);
          // The product uses ConvTranspose exactly where the stride is above 1; polyphase only where stride 1 needs it.
          const ops = decodeModelProto(composePlan(pm, { passes: [{ relu: 'standard', layers: ['x'], heads: ['grad'] }] }).bytes).graph!.node!
            .filter((nd) => nd.name?.startsWith('ff/')).map((nd) => nd.op_type);
          assert.equal(ops.includes('ConvTranspose'), strided ? form === 'product' : padBeyond, ops.join(' '));
        });
      });
    }
  });
}
