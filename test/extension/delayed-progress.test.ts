/** The progress notification of long panel runs (extension/delayed-progress.ts), with a stand-in editor. */
import { strict as assert } from 'node:assert';
import { delayedProgress, Notification, OpenNotification } from '../../extension/delayed-progress';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

function editor(): { open: OpenNotification; opened: string[]; reports: { message?: string; increment?: number }[]; closed: () => boolean } {
  const opened: string[] = [], reports: { message?: string; increment?: number }[] = [];
  let done = false;
  const open: OpenNotification = (title, _onCancel, run) => {
    opened.push(title);
    const n: Notification = { report: (v) => reports.push(v) };
    void run(n).then(() => { done = true; });
  };
  return { open, opened, reports, closed: () => done };
}

describe('progress notification of long panel runs', () => {
  it('never opens over a visible panel', async () => {
    const e = editor();
    const p = delayedProgress('sweep', () => undefined, () => true, e.open, 20);
    for (let i = 1; i <= 5; i++) { p.report(i, 10); await sleep(10); }
    p.end();
    assert.deepEqual(e.opened, []);
  });

  it('opens after the delay once the panel is out of sight, in whole steps, and closes at the end', async () => {
    const e = editor();
    let visible = true;
    const p = delayedProgress('sweep', () => undefined, () => visible, e.open, 20);
    p.report(1.5, 10);
    await sleep(40);
    assert.deepEqual(e.opened, [], 'still in view after the delay');
    visible = false;
    p.report(3, 10, 'stage2');
    assert.deepEqual(e.opened, ['sweep']);
    p.report(6, 10);
    assert.deepEqual(e.reports, [{ increment: 30, message: '3/10 · stage2' }, { increment: 30, message: '6/10' }]);
    p.end();
    await sleep(0);
    assert.ok(e.closed());
  });

  it('a run that ends before the delay shows nothing', async () => {
    const e = editor();
    const p = delayedProgress('sweep', () => undefined, () => false, e.open, 30);
    p.report(5, 10);
    p.end();
    await sleep(50);
    assert.deepEqual(e.opened, []);
  });
});
