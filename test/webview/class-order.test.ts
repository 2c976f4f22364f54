import { strict as assert } from 'node:assert';
import { defaultFactFoil, keptFactFoil, rankedClasses, searchLabels, stepClass } from '../../webview/class-order';
import { keyLabel, commandForKey, KEY_BINDINGS } from '../../webview/key-bindings';
import { questionFor, questionText } from '../../webview/question';
import { LABELS, PREDICTION, idx } from './harness/synthetic-scene';

const key = (k: string, shift = false) => ({ key: k, shiftKey: shift, ctrlKey: false, metaKey: false, altKey: false });

describe('panel class order, keys and questions', () => {
  it('defaults per DESIGN §2: fact top-1, foil the expected label when misclassified, else the runner-up', () => {
    assert.deepEqual(defaultFactFoil(PREDICTION, 8, idx('bearing')), { fact: idx('washer'), foil: idx('bearing') });
    assert.deepEqual(defaultFactFoil(PREDICTION, 8, idx('washer')), { fact: idx('washer'), foil: idx('bearing') });
    assert.deepEqual(defaultFactFoil(PREDICTION, 8, idx('clip')), { fact: idx('washer'), foil: idx('clip') });
  });

  it('after new settings keeps the classes the user picked, and only those', () => {
    const now = { fact: idx('washer'), foil: idx('bolt') };
    const gear = [{ index: idx('gear'), label: 'gear', p: 0.6 }, ...PREDICTION.filter((p) => p.index !== idx('gear'))];
    assert.deepEqual(keptFactFoil(now, { fact: false, foil: true }, gear, 8), { fact: idx('gear'), foil: idx('bolt') }, 'the fact follows the new top-1');
    assert.deepEqual(keptFactFoil(now, { fact: false, foil: false }, gear, 8), defaultFactFoil(gear, 8));
    assert.deepEqual(keptFactFoil(now, { fact: true, foil: true }, gear, 8), now);
    // the new top-1 is the picked foil: the fact moves to the most probable other class
    const bolt = [{ index: idx('bolt'), label: 'bolt', p: 0.7 }, ...PREDICTION.filter((p) => p.index !== idx('bolt'))];
    assert.deepEqual(keptFactFoil(now, { fact: false, foil: true }, bolt, 8), { fact: idx('washer'), foil: idx('bolt') });
    // a picked class past the end of a shorter label list falls back to the default
    assert.deepEqual(keptFactFoil({ fact: 7, foil: 6 }, { fact: true, foil: true }, PREDICTION.filter((p) => p.index < 4), 4), defaultFactFoil(PREDICTION.filter((p) => p.index < 4), 4));
  });

  it('steps foils by probability, skipping the fact and wrapping', () => {
    const ranked = rankedClasses(PREDICTION, 8);
    assert.deepEqual(ranked.map((i) => LABELS[i]), ['washer', 'bearing', 'hex-nut', 'gear', 'clip', 'spring', 'bolt', 'bracket']);
    assert.equal(LABELS[stepClass(ranked, idx('bearing'), 1, idx('washer'))], 'hex-nut');
    assert.equal(LABELS[stepClass(ranked, idx('bearing'), -1, idx('washer'))], 'bracket', 'skips washer, wraps to the end');
    // a top-k prediction: unranked labels follow in label order
    assert.deepEqual(rankedClasses(PREDICTION.slice(0, 2), 4), [1, 2, 0, 3]);
  });

  it('searches labels: prefix matches first, then substrings, in rank order', () => {
    const ranked = rankedClasses(PREDICTION, 8);
    assert.deepEqual(searchLabels(LABELS, ranked, 'b').map((i) => LABELS[i]), ['bearing', 'bolt', 'bracket']);
    assert.deepEqual(searchLabels(LABELS, ranked, 'g').map((i) => LABELS[i]), ['gear', 'bearing', 'spring']);
    assert.deepEqual(searchLabels(LABELS, ranked, 'zz'), []);
  });

  it('dispatches keys from one table; modified keys are left to the editor', () => {
    assert.equal(commandForKey(key('ArrowUp')), 'layer-shallower');
    assert.equal(commandForKey(key(']')), 'layer-deeper');
    assert.equal(commandForKey(key('ArrowRight')), 'foil-next');
    assert.equal(commandForKey(key('ArrowRight', true)), 'fact-next');
    assert.equal(commandForKey(key('3')), 'kind:mismatch');
    assert.equal(commandForKey(key('?', true)), 'help');
    assert.equal(commandForKey({ ...key('s'), ctrlKey: true }), undefined);
    const seen = new Set<string>();
    for (const b of KEY_BINDINGS) for (const k of b.keys) {
      const id = `${b.shift ? 'S-' : ''}${k}`;
      assert.ok(!seen.has(id), `key ${id} bound twice`);
      seen.add(id);
    }
    assert.equal(keyLabel(KEY_BINDINGS[0]), '↑ / [');
  });

  it('asks the question in plain words per kind', () => {
    assert.equal(questionText(questionFor('contrast', 'margin', 'washer', 'bearing')), 'Why washer, not bearing?');
    assert.equal(questionText(questionFor('evidence', undefined, 'washer', undefined)), 'Why washer?');
    assert.equal(questionText(questionFor('mismatch', 'weighted', 'washer', 'bearing')), 'Where do all classes disagree?');
    assert.match(questionFor('contrast', 'loss', 'washer', 'bearing').detail, /loss as if bearing were right/);
  });
});
