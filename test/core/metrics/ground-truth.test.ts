import { strict as assert } from 'assert';
import { aucJudd, boxToMask, cc, energyInMask, mulberry32, nss, pointingHit, randomMap, sim } from '../../../core/metrics';
import { UserError } from '../../../core/errors';

const close = (a: number, b: number, tol = 1e-9): void => assert.ok(Math.abs(a - b) < tol, `${a} vs ${b}`);

// Definitions from Bylinskii et al., TPAMI 2018 (recalled from memory); numbers below by hand.
describe('metrics/ground-truth', () => {
  const map5 = [0, 1, 2, 3, 4];
  const mask5 = [0, 0, 0, 1, 1];

  it('NSS: mean z-score at the mask pixels (worked example)', () => {
    // mean 2, Σ(m−2)² = 10, sample sd √(10/4) = √2.5; z at the mask: 1/√2.5, 2/√2.5 → mean 1.5/√2.5.
    close(nss(map5, mask5), 1.5 / Math.sqrt(2.5));
  });

  it('CC: Pearson of map and mask (worked example)', () => {
    // mask mean 0.4; Σ(m−2)(g−0.4) = .8+.4+0+.6+1.2 = 3, Σ(g−.4)² = 1.2, Σ(m−2)² = 10 → 3/√12.
    close(cc(map5, mask5), 3 / Math.sqrt(12));
  });

  it('AUC-Judd: worked example with a tie across the mask border', () => {
    // mask values 0.9, 0.3, 0.5; outside 0.1, 0.8, 0.5. ROC points at the thresholds 0.9, 0.5, 0.3:
    // (0,⅓); just above 0.5 (⅓,⅓), at 0.5 (⅔,⅔); at 0.3 (⅔,1); then (1,1).
    // Area = ⅓·⅓ + ⅓·(⅓+⅔)/2 + ⅓·1 = 1/9 + 1/6 + 1/3 = 11/18.
    // Same as Mann–Whitney: pairs won 3 + 1 + (1 + ½ tie) = 5.5 of 9 = 11/18.
    close(aucJudd([0.9, 0.1, 0.8, 0.3, 0.5, 0.5], [1, 0, 0, 1, 1, 0]), 11 / 18);
  });

  it('AUC-Judd equals the Mann–Whitney probability on random maps (Hanley & McNeil, Radiology 1982)', () => {
    for (let seed = 1; seed <= 4; seed++) {
      const next = mulberry32(seed);
      const map = Array.from({ length: 150 }, () => Math.round(next() * 8)); // coarse → ties
      const mask = map.map((v) => (next() < 0.2 + 0.05 * v ? 1 : 0));
      let wins = 0;
      let pairs = 0;
      for (let i = 0; i < map.length; i++) {
        if (mask[i] !== 1) continue;
        for (let j = 0; j < map.length; j++) {
          if (mask[j] !== 0) continue;
          pairs++;
          wins += map[i] > map[j] ? 1 : map[i] === map[j] ? 0.5 : 0;
        }
      }
      close(aucJudd(map, mask), wins / pairs, 1e-12);
    }
  });

  it('AUC-Judd is 1 for the mask itself, 0 for the inverted mask, ≈ 0.5 for random maps', () => {
    const w = 32;
    const mask = boxToMask(8, 8, 12, 10, w, w);
    close(aucJudd(Float32Array.from(mask), mask), 1);
    close(aucJudd(Float32Array.from(mask, (m) => 1 - m), mask), 0);
    let total = 0;
    const seeds = 40;
    for (let seed = 0; seed < seeds; seed++) total += aucJudd(randomMap(w, w, seed), mask);
    // 120 mask pixels against 904: the AUC of one random map has sd ≈ 0.028, the mean of 40 ≈ 0.0045.
    close(total / seeds, 0.5, 0.02);
  });

  it('SIM: histogram intersection (worked example)', () => {
    // map min–max → (0, ⅓, ⅔, 1), sum 2 → (0, ⅙, ⅓, ½); mask → (0, 0, ½, ½); Σmin = ⅓ + ½ = 5/6.
    close(sim([0, 1, 2, 3], [0, 0, 1, 1]), 5 / 6);
    close(sim([0, 0, 1, 1], [0, 0, 1, 1]), 1);
    close(sim([1, 1, 0, 0], [0, 0, 1, 1]), 0);
    // A constant map is taken as uniform: ¼ per pixel, Σmin with (0,0,½,½) = ½.
    close(sim([2, 2, 2, 2], [0, 0, 1, 1]), 0.5);
  });

  it('energy in the mask counts only positive mass', () => {
    // positive mass 2 + 3 + 5 = 10 (the −1 is left out), inside 2 + 5 = 7 → 0.7.
    close(energyInMask([-1, 2, 3, 5], [0, 1, 0, 1]), 0.7);
    assert.ok(Number.isNaN(energyInMask([-1, 0, -2, 0], [0, 1, 0, 1])));
  });

  it('pointing game: the arg-max must lie within the tolerance of the mask', () => {
    const w = 5;
    const map = new Float32Array(25);
    map[0 * w + 4] = 1; // maximum at (x 4, y 0)
    const mask = new Uint8Array(25);
    mask[0 * w + 1] = 1; // mask pixel at (1, 0): distance 3
    assert.equal(pointingHit(map, mask, w, w, 2.9), false);
    assert.equal(pointingHit(map, mask, w, w, 3), true);
    const diag = new Float32Array(25);
    diag[0] = 1; // maximum at (0,0)
    const far = new Uint8Array(25);
    far[2 * w + 2] = 1; // (2,2): distance √8 ≈ 2.83
    assert.equal(pointingHit(diag, far, w, w, 2.8), false);
    assert.equal(pointingHit(diag, far, w, w, 2.9), true);
    assert.equal(pointingHit(diag, far, w, w, 0), false);
    far[0] = 1;
    assert.equal(pointingHit(diag, far, w, w, 0), true); // on the mask itself
  });

  it('boxToMask marks the pixels whose centres lie in the box', () => {
    // 4×3 image, box x 0.5, y 1, 2×1.5: centres 0.5, 1.5 ∈ [0.5, 2.5) → columns 0, 1;
    // centres 1.5 ∈ [1, 2.5) → row 1 only (2.5 is outside).
    assert.deepEqual(Array.from(boxToMask(0.5, 1, 2, 1.5, 4, 3)), [0, 0, 0, 0, 1, 1, 0, 0, 0, 0, 0, 0]);
    // A box reaching past the top-left corner is clipped: centres in [−3, 2) → columns 0,1, rows 0,1.
    assert.deepEqual(Array.from(boxToMask(-3, -3, 5, 5, 4, 3)), [1, 1, 0, 0, 1, 1, 0, 0, 0, 0, 0, 0]);
  });

  it('refuses bad masks and boxes with a UserError', () => {
    assert.throws(() => boxToMask(10, 10, 2, 2, 4, 3), UserError);
    assert.throws(() => nss([1, 2, 3], [0, 0, 0]), UserError);
    assert.throws(() => aucJudd([1, 2, 3], [1, 1, 1]), UserError);
    assert.throws(() => nss([1, 2, 3], [0, 2, 1]), UserError);
    assert.throws(() => cc([1, 2, 3], [0, 1]), UserError);
  });
});
