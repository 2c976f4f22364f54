/**
 * The question a map answers, in plain words, per map kind (DESIGN §2, §4).
 * Returned as parts so the view can set class names in italics without building HTML strings.
 */
import type { MapKind, MapVariant } from './protocol';

export type QuestionPart = { text: string } | { label: string };
export interface Question { parts: QuestionPart[]; detail: string }

export function questionFor(kind: MapKind, variant: MapVariant | undefined, fact: string, foil: string | undefined): Question {
  switch (kind) {
    case 'evidence':
      return { parts: [{ text: 'Why ' }, { label: fact }, { text: '?' }], detail: `Where the evidence for ${fact} lies (Grad-CAM)` };
    case 'contrast': {
      const f = foil ?? '…';
      return {
        parts: [{ text: 'Why ' }, { label: fact }, { text: ', not ' }, { label: f }, { text: '?' }],
        detail: variant === 'loss'
          ? `Evidence against the label being ${f}: gradient of the loss as if ${f} were right`
          : `Evidence for the score margin ${fact} − ${f}`,
      };
    }
    case 'mismatch':
      return {
        parts: [{ text: 'Where do all classes disagree?' }],
        detail: variant === 'gradient'
          ? 'Mean × variance of the per-class loss gradients'
          : 'Mean × variance of the per-class loss gradients, weighted by the activation',
      };
    case 'expectancy':
      return { parts: [{ text: 'What stands out in the activations alone?' }], detail: 'Mean × variance across channels: the baseline for the mismatch map' };
    case 'detail':
      return { parts: [{ text: 'Which fine detail drives ' }, { label: fact }, { text: '?' }], detail: 'Guided backpropagation, at input resolution' };
    case 'guided-evidence':
      return { parts: [{ text: 'Which detail inside the evidence for ' }, { label: fact }, { text: '?' }], detail: 'Guided backpropagation × upsampled evidence' };
  }
}

/** The question as one plain string (titles, aria labels, pin captions). */
export function questionText(q: Question): string {
  return q.parts.map((p) => ('text' in p ? p.text : p.label)).join('');
}
