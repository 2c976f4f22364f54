/**
 * `factfoil check`: the trust checks (DESIGN §4.2) for one or more images. Each image gets a
 * small report beside it (or in --out): the JSON figures and PNG charts, never overwriting.
 * Several images (or a folder) also get a summary, mean ± sd per figure and map kind.
 */
import { readdirSync, statSync } from 'node:fs';
import * as path from 'node:path';
import sharp from 'sharp';
import { Engine } from '../engine/engine';
import { UserError } from '../errors';
import { ensureOutputFolder } from '../io/atomic';
import { writeUniqueFiles } from '../io/naming';
import { resolveClass } from '../io/labels';
import { findMask, ImageItem } from '../io/masks';
import { chartRow, lineChart, svgText, SvgNode } from '../trust/chart';
import { CHART_PNG_STYLE, EXPLAIN, savedChartSets } from '../trust/figures';
import { writeTrustReport } from '../trust/report-files';
import { TRUST_MAP_KINDS, TRUST_TESTS, TrustMapKind, TrustReport, TrustTest } from '../trust/report';
import { defaultTrustLayer, regionFor, runTrustChecks } from '../trust/run';
import { summarizeReports, summaryJson, TrustSummary } from '../trust/summary';
import { parseBox } from '../trust/truth';
import { Summary } from '../metrics/summarize';
import type { ModelContext } from '../workflow/open-model';
import { openModelNoting } from './open';
import { imageInput } from '../workflow/model-input';
import { CliArgs, modelPath, resolveLayer } from './args';

const IMAGE_EXT = /\.(png|jpe?g|webp|tiff?|gif|avif)$/i;
/** Files this tool wrote (maps, trust charts) are not test images. */
const OUR_OUTPUT = /\.(evidence|contrast|mismatch|expectancy|detail|guided-evidence|trust)\./;



/** Images named or found under folders (recursively, sorted), skipping mask folders and our own outputs. */
function expandImages(items: string[]): ImageItem[] {
  const out: ImageItem[] = [];
  const walk = (dir: string, root: string): void => {
    for (const e of readdirSync(dir).sort()) {
      const p = path.join(dir, e);
      if (statSync(p).isDirectory()) { if (!/-masks$/.test(e)) walk(p, root); } else if (IMAGE_EXT.test(e) && !OUR_OUTPUT.test(e)) out.push({ file: p, root });
    }
  };
  for (const item of items) {
    let st;
    try { st = statSync(item); } catch { throw new UserError(`cannot read image ${item}`, 'check the path'); }
    if (st.isDirectory()) walk(item, item); else out.push({ file: item });
  }
  return out;
}

function parseList<T extends string>(arg: string | undefined, allowed: readonly T[], what: string): T[] | undefined {
  if (arg === undefined) return undefined;
  const items = arg.split(',').map((s) => s.trim()).filter(Boolean) as T[];
  for (const x of items) if (!allowed.includes(x)) throw new UserError(`unknown ${what} '${x}'`, `choose from ${allowed.join(', ')}`);
  if (!items.length) throw new UserError(`--${what === 'map kind' ? 'map' : 'tests'} needs at least one value`);
  return items;
}

export async function checkCommand(engine: Engine, args: CliArgs): Promise<number> {
  const v = args.values;
  if (v.out) ensureOutputFolder(v.out);
  const ctx = await openModelNoting(engine, modelPath(args), v.labels);
  const tests = parseList<TrustTest>(v.tests, TRUST_TESTS, 'check');
  const kinds = parseList<TrustMapKind>(v.map, TRUST_MAP_KINDS, 'map kind');
  const layer = v.layer ? resolveLayer(ctx.pm, v.layer)[0] : defaultTrustLayer(ctx.pm);
  const seed = v.seed !== undefined ? Number(v.seed) : undefined;
  if (seed !== undefined && !(Number.isInteger(seed) && seed >= 0 && seed < 2 ** 32)) throw new UserError(`--seed must be an integer in [0, 2³²), not '${v.seed}'`);
  if (v.mask && v.box) throw new UserError('give --mask or --box, not both');
  const items = expandImages(args.positionals);
  if (!items.length) throw new UserError('missing <image>', 'pass one or more images or folders');
  if ((v.mask || v.box) && items.length > 1) throw new UserError('--mask and --box describe one image; for several use --masks <dir> or the <folder>-masks layout');

  const abort = new AbortController();
  const onInt = () => abort.abort();
  process.once('SIGINT', onInt);
  const results: { image: string; files: string[]; report: TrustReport }[] = [];
  try {
    for (const item of items) {
      const input = await imageInput(ctx, item.file);
      const size = { width: input.image!.width, height: input.image!.height };
      const maskFile = v.mask ?? (v.box ? undefined : findMask(item, v.masks));
      const wantTruth = tests ? tests.includes('truth') : true;
      if (tests?.includes('truth') && !maskFile && !v.box) {
        throw new UserError(`no mask for ${item.file}`, 'give --mask m.png or --box x,y,w,h, or put masks in --masks <dir> or a sibling <folder>-masks folder');
      }
      const region = wantTruth ? await regionFor({ maskFile, box: v.box ? parseBox(v.box) : undefined }, size) : undefined;
      const tty = process.stderr.isTTY;
      const report = await runTrustChecks(engine, ctx.pm, { data: input.data, layout: ctx.spec.layout, geometry: input.geometry }, {
        tests, kinds, layer, region, seed,
        fact: v.fact !== undefined ? resolveClass(v.fact, ctx.labels, 'fact') : undefined,
        foil: v.foil !== undefined ? resolveClass(v.foil, ctx.labels, 'foil') : undefined,
      }, tty ? (d, t, m) => process.stderr.write(`\r  ${Math.round((100 * d) / t)}%  ${m.slice(0, 60).padEnd(60)}`) : undefined, abort.signal);
      if (tty) process.stderr.write('\r' + ' '.repeat(70) + '\r');
      const files = await saveReport(ctx, input.path, report, v.out);
      results.push({ image: input.path, files, report });
      process.stderr.write(`${item.file}: ${ctx.labels[report.fact]} (${(100 * report.p_fact).toFixed(1)}%) at ${layer}: ${files.map((f) => path.basename(f)).join(', ')}\n`);
      if (!v.json && items.length === 1) process.stdout.write(reportText(report, ctx.labels));
    }
  } catch (e) {
    if (abort.signal.aborted) throw new UserError('stopped by Ctrl-C; reports written so far are complete');
    throw e;
  } finally {
    process.off('SIGINT', onInt);
  }

  if (results.length === 1) {
    const r = results[0];
    if (v.json) process.stdout.write(JSON.stringify({ image: r.image, files: r.files, ...r.report }) + '\n');
    return 0;
  }
  const summary = summarizeReports(results.map((r) => r.report));
  const dir = v.out ? path.resolve(v.out) : commonFolder(items);
  const written = await writeUniqueFiles(dir, 'trust-summary', ['.json'], () => [JSON.stringify({ format: 'factfoil-trust-summary/1', model: ctx.pm.model.path, layer, summary: summaryJson(summary), images: results.map((r) => ({ image: r.image, files: r.files })) }, null, 2) + '\n']);
  if (v.json) {
    process.stdout.write(JSON.stringify({ summary: summaryJson(summary), summary_file: written.paths[0], images: results.map((r) => ({ image: r.image, files: r.files, ...r.report })) }) + '\n');
  } else {
    process.stdout.write(summaryText(summary));
  }
  process.stderr.write(`summary of ${results.length} images: ${written.paths[0]}\n`);
  return 0;
}

function commonFolder(items: ImageItem[]): string {
  const dirs = items.map((i) => path.resolve(i.root ?? path.dirname(i.file)));
  let common = dirs[0];
  while (!dirs.every((d) => d === common || d.startsWith(common + path.sep))) common = path.dirname(common);
  return common;
}

// ---- the report files -----------------------------------------------------------------------

async function chartPng(charts: SvgNode[]): Promise<Buffer> {
  const svg = svgText(chartRow(charts, '#ffffff'), CHART_PNG_STYLE);
  return sharp(Buffer.from(svg), { density: 144 }).png().toBuffer();
}

/** Writes `<image>.trust.<layer>.<fact>.json` and its charts beside the image (or in outDir), never overwriting. */
async function saveReport(ctx: ModelContext, imagePath: string, report: TrustReport, outDir?: string): Promise<string[]> {
  const charts = await Promise.all(savedChartSets(report).map(async ([name, specs]) => ({ ext: `.${name}.png`, png: await chartPng(specs.map(lineChart)) })));
  return writeTrustReport({ imagePath, model: { path: ctx.pm.model.path, sha256: ctx.pm.model.sha256 }, labels: ctx.labels, ...(outDir ? { outDir } : {}) }, report, charts);
}

// ---- text output ------------------------------------------------------------------------------

const f2 = (v: number | null | undefined): string => (v === null || v === undefined || !Number.isFinite(v) ? '   —' : v.toFixed(2).padStart(5));
/** mean ± sd, and the count in brackets when some images had no value (a flat map has no rank correlation). */
const ms = (s: Summary | undefined): string => (s && s.n
  ? `${s.mean.toFixed(2)} ± ${Number.isFinite(s.sd) ? s.sd.toFixed(2) : '—'}${s.skipped ? ` (${s.n})` : ''}`.padStart(16)
  : '—'.padStart(16));

function table(head: string[], rows: string[][], widths: number[]): string {
  const line = (cells: string[]) => cells.map((c, i) => (i === 0 ? c.padEnd(widths[0]) : c.padStart(widths[i] ?? 12))).join('  ');
  return [line(head), ...rows.map(line)].join('\n') + '\n';
}

function reportText(r: TrustReport, labels: string[]): string {
  const out: string[] = [`fact ${labels[r.fact]} (p ${r.p_fact.toFixed(3)}), layer ${r.layer}${r.foil !== undefined ? `, foil ${labels[r.foil]}` : ''}\n`];
  if (r.sanity) {
    out.push(`\nsanity — Spearman with the trained model's map after cascading randomization (Adebayo et al. 2018)\n  ${EXPLAIN.cascade}\n`);
    out.push(table(['randomized', ...r.kinds], r.sanity.cascade.map((s) => [s.randomized.at(-1)!, ...r.kinds.map((k) => (s.flat.includes(k) ? ' flat' : f2(s.spearman[k])))]), [14, ...r.kinds.map((k) => Math.max(6, k.length))]));
  }
  if (r.faithfulness) {
    const f = r.faithfulness;
    out.push(`\nfaithfulness — area under the curve (deletion: lower is better; insertion: higher is better)\n`);
    out.push(table(['map', 'deletion', 'insertion', 'random del', 'random ins'], r.kinds.map((k) => {
      const m = f.maps[k]!;
      const b = f.random[m.baseline];
      return [k, f2(m.deletion.auc), f2(m.insertion.auc), f2(b.deletion.auc), f2(b.insertion.auc)];
    }), [16, 9, 9, 10, 10]));
  }
  if (r.truth) {
    out.push(`\ntruth — against the ${r.truth.source} (covers ${(100 * r.truth.mask_fraction).toFixed(1)}% of the image)\n`);
    out.push(table(['map', 'NSS', 'CC', 'AUC-Judd', 'SIM', 'energy in', 'pointing'], r.kinds.map((k) => {
      const t = r.truth!.maps[k]!;
      return [k, f2(t.nss), f2(t.cc), f2(t.auc_judd), f2(t.sim), f2(t.energy_in_mask), t.pointing_hit ? 'hit' : 'miss'];
    }), [16, 6, 6, 8, 6, 9, 8]));
  }
  if (r.robustness) {
    out.push(`\nrobustness — Spearman with the clean map\n`);
    out.push(table(['perturbation', 'p(fact)', ...r.kinds], r.robustness.steps.map((s) => [`${s.perturbation} ${s.strength}`, f2(s.p_fact), ...r.kinds.map((k) => f2(s.drift[k]?.spearman))]), [14, 7, ...r.kinds.map((k) => Math.max(6, k.length))]));
  }
  for (const n of r.notes) out.push(`note: ${n}\n`);
  out.push(`\n${EXPLAIN.caution}\n`);
  return out.join('');
}

function summaryText(s: TrustSummary): string {
  const out: string[] = [`summary over ${s.images} images (mean ± sd)\n`];
  const kindsOf = (o: object | undefined) => Object.keys(o ?? {}) as TrustMapKind[];
  if (s.sanity) {
    const kinds = kindsOf(s.sanity.cascade[0]?.spearman);
    out.push(`\nsanity — Spearman with the trained model's map, cascading randomization from the scores down\n`);
    out.push(table(['randomized', ...kinds], s.sanity.cascade.map((c) => [c.randomized.at(-1)!, ...kinds.map((k) => ms(c.spearman[k]))]), [14, ...kinds.map(() => 16)]));
    out.push('  (n) = images whose map kept some structure; a flat map has no rank correlation\n');
  }
  if (s.faithfulness) {
    const f = s.faithfulness;
    const kinds = kindsOf(f.deletion_auc);
    out.push(`\nfaithfulness — AUC (deletion lower is better, insertion higher)\n`);
    out.push(table(['map', 'deletion', 'insertion'], [
      ...kinds.map((k) => [k, ms(f.deletion_auc[k]), ms(f.insertion_auc[k])]),
      ['random (pixels)', ms(f.random_pixels.deletion_auc), ms(f.random_pixels.insertion_auc)],
      ['random (grid)', ms(f.random_layer_grid.deletion_auc), ms(f.random_layer_grid.insertion_auc)],
    ], [16, 16, 16]));
  }
  if (s.truth) {
    const t = s.truth;
    const kinds = kindsOf(t.nss);
    const keys = ['nss', 'cc', 'auc_judd', 'sim', 'energy_in_mask', 'pointing_hit'] as const;
    out.push(`\ntruth — against the masks\n`);
    out.push(table(['map', ...keys], kinds.map((k) => [k, ...keys.map((key) => ms((t[key] as Partial<Record<TrustMapKind, Summary>>)[k]))]), [16, ...keys.map(() => 16)]));
  }
  if (s.robustness) {
    const kinds = kindsOf(s.robustness[0]?.spearman);
    out.push(`\nrobustness — Spearman with the clean map\n`);
    out.push(table(['perturbation', ...kinds], s.robustness.map((r) => [`${r.perturbation} ${r.strength}`, ...kinds.map((k) => ms(r.spearman[k]))]), [14, ...kinds.map(() => 16)]));
  }
  out.push(`\n${EXPLAIN.caution}\n`);
  return out.join('');
}
