/**
 * A second form of the strided Conv input gradient, kept in the bench to compare against the
 * product's onnxruntime ConvTranspose (conv-ab.ts, profile.ts; checked against the adjoint of the
 * ONNX Conv definition in test/core/autodiff/rules/conv.test.ts): a polyphase split, one stride-1
 * Conv per output phase with the sub-kernel of the taps that reach that phase, interleaved back
 * by DepthToSpace (2-D, equal strides) or reshape and transpose. Exact, but on the 2-core AMD
 * EPYC it was no faster than ConvTranspose on the ResNet-18 sweep (the interleave and the
 * concatenation cost what the phase Convs save; test/bench, 3 Dec 2026), so the product keeps
 * ConvTranspose; on a 2-core Intel Xeon with AVX-512 it took 1.05× (3 Dec 2026).
 */
import { attrInt, attrInts } from '../../core/model/graph';
import { gradientRules } from '../../core/autodiff/rules';
import { explicitPads } from '../../core/autodiff/rules/conv';
import { A } from '../../core/autodiff/builder';
import { GradientRule, RuleContext, reshapeGrad, zerosGrad } from '../../core/autodiff/rule';

const productConv = gradientRules.Conv;

/** Strided Conv input gradients as polyphase stride-1 Convs; everything else as the product does it. */
export const polyphaseConv: GradientRule = (ctx) => {
  const { node, b } = ctx;
  const xs = ctx.shape(node.inputs[0]), ws = ctx.shape(node.inputs[1]), ys = ctx.shape(node.outputs[0]);
  const n = xs.length - 2, kernel = ws.slice(2);
  const strides = attrInts(node, 'strides') ?? new Array(n).fill(1);
  if (!ctx.gradOut[0] || !ctx.needs[0] || ctx.needs[1] || strides.every((s) => s === 1)) return productConv(ctx);
  const dil = attrInts(node, 'dilations') ?? new Array(n).fill(1);
  const pads = explicitPads(ctx, xs.slice(2), kernel, strides, dil);
  const gy = b.op1('Reshape', [ctx.gradOut[0], b.constI64([-1, ...ys.slice(1)])]);
  const phases = polyphaseGeometry(xs.slice(2), ys.slice(2), kernel, strides, dil, pads);
  return [reshapeGrad(ctx, polyphaseInputGradient(ctx, gy, node.inputs[1], ws, attrInt(node, 'group', 1), xs, ys.slice(2), phases), xs)];
};

/** One output phase r of one spatial axis: a stride-1 Conv over g with some of the kernel's taps. */
export interface AxisPhase {
  /** Kernel taps that write to input positions ≡ r (mod s), in the order the Conv reads them (reversed). */
  taps: number[];
  dilation: number;
  padBegin: number;
  padEnd: number;
  /** Leading and trailing rows of g this phase never reads (where its pad would be negative). */
  cropBegin: number;
  cropEnd: number;
}

/**
 * Polyphase split of the transposed convolution along each axis (undefined for a phase that
 * receives nothing). With y[o] = Σ_k W[k]·x[s·o + d·k − p], input
 * position i = s·q + r receives W[k]·g[q − m_k] from every tap k with d·k − r − p ≡ 0 (mod s),
 * m_k = (d·k − r − p)/s. Those taps are k₀ + j·s′ (s′ = s/gcd(s,d)) with m stepping by
 * d′ = d/gcd(s,d), so phase r is the stride-1 correlation of g with the reversed taps at
 * dilation d′ and begin pad m_last; the end pad makes every phase ⌈X/s⌉ long (extra rows are
 * cut after interleaving). Per phase the MACs are those of its taps: the sum is the forward's.
 */
export function polyphaseGeometry(inSize: number[], outSize: number[], kernel: number[], strides: number[], dil: number[], pads: number[]): (AxisPhase | undefined)[][] {
  const axes: (AxisPhase | undefined)[][] = [];
  for (let a = 0; a < inSize.length; a++) {
    const s = strides[a], d = dil[a], p = pads[a], q = Math.ceil(inSize[a] / s);
    const phases: (AxisPhase | undefined)[] = [];
    for (let r = 0; r < s; r++) {
      const taps: number[] = [];
      for (let k = 0; k < kernel[a]; k++) if ((((d * k - r - p) % s) + s) % s === 0) taps.push(k);
      if (!taps.length) { phases.push(undefined); continue; }
      const step = taps.length > 1 ? (d * (taps[1] - taps[0])) / s : 1;
      const padBegin = (d * taps[taps.length - 1] - r - p) / s;
      const padEnd = q - outSize[a] + (taps.length - 1) * step - padBegin;
      // A negative pad crops g instead (Conv takes no negative pads); a phase left reading
      // nothing of g receives nothing.
      const cropBegin = Math.max(0, -padBegin), cropEnd = Math.max(0, -padEnd);
      if (outSize[a] - cropBegin - cropEnd < 1) { phases.push(undefined); continue; }
      phases.push({ taps: taps.reverse(), dilation: step, padBegin: padBegin + cropBegin, padEnd: padEnd + cropEnd, cropBegin, cropEnd });
    }
    axes.push(phases);
  }
  return axes;
}

/**
 * The input gradient [K·1, C_in, X…] from the phase Convs: phases with no taps are zeros; the
 * phase outputs [K, C_in, Q…] are concatenated phase-major along the channels and interleaved so
 * that position q·s + r follows: in 2-D with equal strides by DepthToSpace in DCR mode (its
 * channel index is (r₁·s + r₂)·C + c, ONNX DepthToSpace spec), otherwise stacked, reshaped to
 * [K, s₁…sₙ, C_in, Q₁…Qₙ] and transposed to [K, C_in, Q₁, s₁, …, Qₙ, sₙ]; then cut to the input size.
 */
function polyphaseInputGradient(ctx: RuleContext, gy: string, w: string, ws: number[], group: number, xs: number[], outSize: number[], axes: (AxisPhase | undefined)[][]): string {
  const { b } = ctx;
  const n = axes.length, cin = xs[1], inSize = xs.slice(2);
  const strides = axes.map((p) => p.length);
  const q = inSize.map((size, a) => Math.ceil(size / strides[a]));
  const swapped = swappedKernel(ctx, w, ws, group);
  const combos: (AxisPhase | undefined)[][] = [[]];
  for (const phases of axes) combos.splice(0, combos.length, ...combos.flatMap((c) => phases.map((p) => [...c, p])));
  const outs = combos.map((c) => {
    if (c.some((p) => !p)) return undefined;
    const ph = c as AxisPhase[];
    let kernel = swapped;
    ph.forEach((p, a) => {
      if (p.taps.length === ws[2 + a] && p.taps.every((t, j) => t === j)) return;
      kernel = b.op1('Gather', [kernel, b.constI64(p.taps)], { axis: A.i(2 + a) });
    });
    const cropped = ph.map((_, a) => a).filter((a) => ph[a].cropBegin || ph[a].cropEnd);
    const input = cropped.length
      ? b.op1('Slice', [gy, b.constI64(cropped.map((a) => ph[a].cropBegin)), b.constI64(cropped.map((a) => outSize[a] - ph[a].cropEnd)), b.constI64(cropped.map((a) => a + 2))])
      : gy;
    return b.op1('Conv', [input, kernel], {
      pads: A.ints([...ph.map((p) => p.padBegin), ...ph.map((p) => p.padEnd)]), dilations: A.ints(ph.map((p) => p.dilation)),
      group: A.i(group), kernel_shape: A.ints(ph.map((p) => p.taps.length)), strides: A.ints(ph.map(() => 1)),
    });
  });
  const any = outs.find((o) => o);
  if (!any) return zerosGrad(ctx, xs); // no tap reaches the input
  if (outs.length === 1) return any;
  const zeros = () => b.op1('ConstantOfShape', [b.op1('Shape', [any])], { value: { t: { dims: [1], data_type: 1, raw_data: new Uint8Array(4) } } });
  if (n === 2 && strides[0] === strides[1]) {
    const d2s = b.op1('DepthToSpace', [b.op1('Concat', outs.map((o) => o ?? zeros()), { axis: A.i(1) })], { blocksize: A.i(strides[0]), mode: A.s('DCR') });
    const cut2 = inSize.map((_, a) => a).filter((a) => q[a] * strides[a] !== inSize[a]);
    if (!cut2.length) return d2s;
    return b.op1('Slice', [d2s, b.constI64(cut2.map(() => 0)), b.constI64(cut2.map((a) => inSize[a])), b.constI64(cut2.map((a) => a + 2))]);
  }
  const stacked = b.op1('Concat', outs.map((o) => b.op1('Unsqueeze', [o ?? zeros(), b.constI64([1])])), { axis: A.i(1) });
  const split = b.op1('Reshape', [stacked, b.constI64([-1, ...strides, cin, ...q])]);
  const perm = [0, n + 1, ...strides.flatMap((_, a) => [n + 2 + a, 1 + a])];
  const woven = b.op1('Reshape', [b.op1('Transpose', [split], { perm: A.ints(perm) }), b.constI64([-1, cin, ...q.map((v, a) => v * strides[a])])]);
  const cut = inSize.map((_, a) => a).filter((a) => q[a] * strides[a] !== inSize[a]);
  if (!cut.length) return woven;
  return b.op1('Slice', [woven, b.constI64(cut.map(() => 0)), b.constI64(cut.map((a) => inSize[a])), b.constI64(cut.map((a) => a + 2))]);
}

/** Conv weights [Cout, Cin/g, k…] → [Cin, Cout/g, k…]: within each group swap the in/out axes (the adjoint's channel roles). */
function swappedKernel(ctx: RuleContext, w: string, ws: number[], group: number): string {
  const { b } = ctx;
  const [cout, cinG, ...k] = ws;
  const spatial = k.map((_, i) => i + 3);
  const grouped = b.op1('Reshape', [w, b.constI64([group, cout / group, cinG, ...k])]);
  const swapped = b.op1('Transpose', [grouped], { perm: A.ints([0, 2, 1, ...spatial]) });
  return b.op1('Reshape', [swapped, b.constI64([group * cinG, cout / group, ...k])]);
}
