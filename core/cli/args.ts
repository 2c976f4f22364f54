/** The `factfoil` command line: usage, options, and the arguments every command reads the same way. */
import { parseArgs } from 'node:util';
import { UserError } from '../errors';
import type { PreparedModel } from '../plan/prepared';
import { noLayerReason } from '../model/layers';

export const USAGE = `usage:
  factfoil layers  <model.onnx> [--json]
  factfoil predict <image> --model <m.onnx> [--labels <file>] [--top <n>] [--json]
  factfoil explain <image>... --model <m.onnx> [--map <kind>] [--fact <c>] [--foil <c>] [--contrast margin|loss]
                   [--mismatch weighted|gradient] [--layer <tensor|index|last|stages|all>] [--estimate exact|probe:<K>[:<design>]]
                   [--input <x.npy>] [--out <dir>] [--raw] [--json]
  factfoil grad    --model <m.onnx> (--input <x.npy> | <image>) --layer <tensor> --target <class> [--loss logit|ce] --out <g.npy>
  factfoil check   <image|folder>... --model <m.onnx> [--mask <m.png> | --box x,y,w,h | --masks <dir>]
                   [--map evidence,contrast,detail,guided-evidence,gradient] [--layer <tensor|index>] [--fact <c>] [--foil <c>]
                   [--tests sanity,faithfulness,truth,robustness] [--seed <n>] [--out <dir>] [--json]`;

const OPTIONS = {
  model: { type: 'string' }, labels: { type: 'string' }, top: { type: 'string' }, json: { type: 'boolean' },
  map: { type: 'string' }, fact: { type: 'string' }, foil: { type: 'string' }, contrast: { type: 'string' },
  mismatch: { type: 'string' }, layer: { type: 'string' }, estimate: { type: 'string' }, input: { type: 'string' },
  out: { type: 'string' }, raw: { type: 'boolean' }, target: { type: 'string' }, loss: { type: 'string' }, help: { type: 'boolean', short: 'h' },
  mask: { type: 'string' }, box: { type: 'string' }, masks: { type: 'string' }, tests: { type: 'string' }, seed: { type: 'string' },
} as const;

export type CliArgs = ReturnType<typeof parseCommandArgs>;

export function parseCommandArgs(argv: string[]) {
  try {
    return parseArgs({ args: argv, options: OPTIONS, allowPositionals: true, strict: true });
  } catch (e) {
    throw new UserError(`${(e as Error).message.split('\n')[0]}`, 'run `factfoil --help`');
  }
}

/** --model, which every command but `layers` needs. */
export function modelPath(args: CliArgs): string {
  if (!args.values.model) throw new UserError('missing --model <model.onnx>');
  return args.values.model;
}

/** --layer tensor|index|last|stages|all → layer ids. */
export function resolveLayer(pm: PreparedModel, arg: string, allowInput = false): string[] {
  const explainable = pm.layers.filter((l) => !l.blockedBy);
  if (['all', 'stages', 'last'].includes(arg) && !explainable.length) throw noLayerReason(pm.analysis, pm.scores.tensor, pm.layers, pm.model.path);
  if (arg === 'all') return explainable.map((l) => l.id);
  if (arg === 'stages') {
    const stages = explainable.filter((l) => l.isStage).map((l) => l.id);
    if (!stages.length) throw new UserError(`no stage of ${pm.model.path} can be explained`, 'pick a layer with --layer (run `factfoil layers <model>` to list them)');
    return stages;
  }
  if (arg === 'last') return explainable.slice(-1).map((l) => l.id);
  if (allowInput && arg === pm.model.input.name) return [arg];
  if (/^\d+$/.test(arg) && pm.layers[Number(arg)]) return [pm.layers[Number(arg)].id];
  if (pm.layers.some((l) => l.id === arg)) return [arg];
  throw new UserError(`unknown layer '${arg}' in ${pm.model.path}`, 'run `factfoil layers <model>` to list them');
}
