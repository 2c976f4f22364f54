/** The `factfoil` command (DESIGN §5). Exit 0 success, 2 user error (one line on stderr), 1 bug. */
import * as path from 'node:path';
import { Engine } from '../engine/engine';
import { UserError, isUserError } from '../errors';
import { openModelNoting, takeOriginNotes } from './open';
import { imageInput, tensorInput } from '../workflow/model-input';
import { softmax, ranked } from '../workflow/prediction';
import { CliArgs, USAGE, modelPath, parseCommandArgs, resolveLayer } from './args';
import { gradientsAt, lossSeed } from '../methods/gradient';
import { resolveClass } from '../io/labels';
import { encodeNpy } from '../io/npy';
import { ensureOutputFolder, writeFileAtomic } from '../io/atomic';
import { explainCommand } from './explain';
import { checkCommand } from './check';
import { noLayerReason } from '../model/layers';

export async function main(argv: string[]): Promise<number> {
  const code = await runCommand(argv);
  if (code === 0) for (const note of takeOriginNotes()) process.stderr.write(note + '\n');
  return code;
}

async function runCommand(argv: string[]): Promise<number> {
  const engine = new Engine();
  try {
    const [command, ...rest] = argv;
    if (!command || command === '--help' || command === '-h') { process.stderr.write(USAGE + '\n'); return command ? 0 : 2; }
    const args = parseCommandArgs(rest);
    if (command === 'layers') return await layersCommand(engine, args);
    if (command === 'predict') return await predictCommand(engine, args);
    if (command === 'explain') return await explainCommand(engine, args);
    if (command === 'grad') return await gradCommand(engine, args);
    if (command === 'check') return await checkCommand(engine, args);
    throw new UserError(`unknown command '${command}'`, 'commands: layers, predict, explain, grad, check');
  } catch (e) {
    if (isUserError(e)) { process.stderr.write(`factfoil: ${e.oneLine()}\n`); return 2; }
    process.stderr.write(`factfoil: internal error: ${(e as Error).stack ?? e}\n`);
    return 1;
  } finally {
    await engine.dispose();
  }
}

async function layersCommand(engine: Engine, args: CliArgs): Promise<number> {
  const ctx = await openModelNoting(engine, args.positionals[0] ?? modelPath(args), args.values.labels);
  if (!ctx.pm.layers.length) throw noLayerReason(ctx.pm.analysis, ctx.pm.scores.tensor, ctx.pm.layers, ctx.pm.model.path);
  const layers = ctx.pm.layers.map((l, index) => ({
    index, id: l.id, shape: l.shape, kind: l.kind, grid: l.grid, stage: l.isStage,
    explainable: !l.blockedBy, ...(l.blockedBy ? { blockedBy: l.blockedBy } : {}),
  }));
  if (args.values.json) {
    process.stdout.write(JSON.stringify({ model: ctx.pm.model.path, input: { name: ctx.pm.model.input.name, dims: ctx.pm.inputDims }, scores: ctx.pm.scores, classes: ctx.labels, layers }, null, 2) + '\n');
  } else {
    process.stdout.write(`scores: ${ctx.pm.scores.tensor} (${ctx.pm.scores.source}), ${ctx.pm.scores.numClasses} classes\n`);
    for (const l of layers) {
      const why = l.blockedBy ? `  not explainable: ${l.blockedBy.opType} '${l.blockedBy.node}' has no gradient rule` : '';
      process.stdout.write(`${String(l.index).padStart(3)}  ${l.stage ? 'stage' : '     '}  [${l.shape.join(',')}]  ${l.id}${why}\n`);
    }
  }
  return 0;
}

async function predictCommand(engine: Engine, args: CliArgs): Promise<number> {
  const ctx = await openModelNoting(engine, modelPath(args), args.values.labels);
  const file = args.positionals[0];
  if (!file && !args.values.input) throw new UserError('missing <image>');
  const input = args.values.input ? await tensorInput(ctx, args.values.input) : await imageInput(ctx, file);
  const p = softmax(await engine.scores(ctx.pm, input.data));
  const top = ranked(p, ctx.labels, Number(args.values.top ?? 5));
  const note = input.image?.note;
  if (note) process.stderr.write(`note: ${note}\n`);
  if (args.values.json) process.stdout.write(JSON.stringify({ image: input.path, prediction: top, ...(note ? { note } : {}) }) + '\n');
  else for (const t of top) process.stdout.write(`${(100 * t.p).toFixed(1).padStart(5)}%  ${t.label}\n`);
  return 0;
}

async function gradCommand(engine: Engine, args: CliArgs): Promise<number> {
  const ctx = await openModelNoting(engine, modelPath(args), args.values.labels);
  const { layer, target, out } = args.values;
  if (!layer || target === undefined || !out) throw new UserError('grad needs --layer, --target and --out');
  const loss = (args.values.loss ?? 'logit') as 'logit' | 'ce';
  if (loss !== 'logit' && loss !== 'ce') throw new UserError(`--loss must be logit or ce, not '${loss}'`);
  ensureOutputFolder(path.dirname(path.resolve(out))); // before the work, as explain and check do
  const input = args.values.input ? await tensorInput(ctx, args.values.input) : args.positionals[0] ? await imageInput(ctx, args.positionals[0]) : undefined;
  if (!input) throw new UserError('grad needs --input <x.npy> or an image');
  const id = resolveLayer(ctx.pm, layer, true)[0];
  const t = resolveClass(target, ctx.labels, 'target');
  const g = (await gradientsAt(engine, ctx.pm, input.data, [id], lossSeed(ctx.pm.scores.numClasses, t, loss))).get(id)!;
  // Drop the seed and batch axes: [K=1, 1, ...shape] → shape.
  const shape = g.dims.slice(2);
  await writeFileAtomic(path.resolve(out), encodeNpy(g.data, shape));
  process.stderr.write(`wrote ${out} [${shape.join(',')}]\n`);
  return 0;
}

if (require.main === module) {
  main(process.argv.slice(2)).then((code) => { process.exitCode = code; });
}
