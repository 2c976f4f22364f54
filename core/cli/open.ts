/**
 * The CLI opens a model as the editor does, and says on stderr what it had to guess, so a guessed
 * setup never passes silently. The notes are held until the command succeeds: a user error stays
 * one line on stderr (DESIGN §5).
 */
import * as path from 'node:path';
import type { Engine } from '../engine/engine';
import { sidecarPath } from '../io/sidecar';
import { ModelContext, openModel } from '../workflow/open-model';

export async function openModelNoting(engine: Engine, modelPath: string, labelsPath?: string): Promise<ModelContext> {
  const ctx = await openModel(engine, modelPath, labelsPath);
  for (const note of originNotes(ctx)) if (!pending.includes(note)) pending.push(note);
  return ctx;
}

const pending: string[] = [];

/** The notes of this run so far, once each; the list is emptied. */
export function takeOriginNotes(): string[] {
  return pending.splice(0);
}

export function originNotes(ctx: ModelContext): string[] {
  const notes: string[] = [];
  const model = ctx.pm.model.path;
  const s = ctx.spec;
  if (ctx.origin.preprocessing === 'guessed') {
    notes.push(`note: ${path.basename(model)} has no preprocessing settings; guessed from its input shape: ${s.size[1]}x${s.size[0]} (width x height) ${s.resize}, ${s.channels} ${s.layout}, pixel x ${s.scale}, mean ${s.mean.join(',')}, std ${s.std.join(',')}. ` +
      `If the model was trained otherwise, its maps and predictions are wrong: write "preprocess" into ${path.basename(sidecarPath(model))} beside the model (README: sidecar fields and presets).`);
  }
  if (ctx.origin.labels === 'generated') {
    notes.push(`note: no labels found for ${path.basename(model)}; classes are named class 0…class ${ctx.labels.length - 1}. Put labels.txt beside the model, or pass --labels <file>.`);
  }
  return notes;
}
