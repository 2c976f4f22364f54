/**
 * Writes one trust report beside its image: `<image>.trust.<layer>.<fact>.json` and its chart
 * PNGs under one fresh stem, never overwriting (core/io/naming writeUniqueFiles). The PNG bytes
 * come from the caller: the CLI renders them with sharp, the panel from the charts it shows.
 */
import * as path from 'node:path';
import { layerShortName, sanitizeNamePart, writeUniqueFiles } from '../io/naming';
import type { TrustReport } from './report';

export interface TrustReportTarget {
  imagePath: string;
  model: { path: string; sha256: string };
  labels: readonly string[];
  /** Default: the image's folder. */
  outDir?: string;
}

/** `.faithfulness.png` etc.: each chart's file ending after the shared stem. */
export interface TrustChartFile { ext: string; png: Uint8Array }

/** PNG files start with these 8 bytes (PNG specification, section 5.2). */
const PNG_SIGNATURE = [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a];
export function isPng(bytes: Uint8Array): boolean {
  return bytes.length > PNG_SIGNATURE.length && PNG_SIGNATURE.every((b, i) => bytes[i] === b);
}

export function trustReportStem(t: TrustReportTarget, report: TrustReport): string {
  const base = path.basename(t.imagePath, path.extname(t.imagePath));
  return [sanitizeNamePart(base, 60), 'trust', sanitizeNamePart(layerShortName(report.layer)), sanitizeNamePart(t.labels[report.fact] ?? `class-${report.fact}`)].join('.');
}

/** The paths written, the JSON first. */
export async function writeTrustReport(t: TrustReportTarget, report: TrustReport, charts: readonly TrustChartFile[]): Promise<string[]> {
  const dir = t.outDir ? path.resolve(t.outDir) : path.dirname(t.imagePath);
  const chosen = await writeUniqueFiles(dir, trustReportStem(t, report), ['.json', ...charts.map((c) => c.ext)], (names) => [
    JSON.stringify({
      image: t.imagePath, model: { path: path.resolve(t.model.path), sha256: t.model.sha256 },
      labels: { fact: t.labels[report.fact], ...(report.foil !== undefined ? { foil: t.labels[report.foil] } : {}) },
      charts: names.paths.slice(1).map((p) => path.basename(p)), ...report,
    }, null, 2) + '\n',
    ...charts.map((c) => c.png),
  ]);
  return chosen.paths;
}
