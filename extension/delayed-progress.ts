/**
 * When the editor shows a progress notification for a panel's long run: only for work that
 * lasts (short sweeps would just flicker) and only while the panel is out of sight, since a
 * visible panel shows the same progress in its own row, with Cancel.
 */
import type { ProgressHandle } from './panel-relay';

export const PROGRESS_DELAY_MS = 400;

/** A notification the editor opened: `report` moves it on by `increment` percent; it closes when the promise `run` returned resolves. */
export interface Notification { report(value: { message?: string; increment?: number }): void }
export type OpenNotification = (title: string, onCancel: () => void, run: (n: Notification) => Promise<void>) => void;

export function delayedProgress(title: string, onCancel: () => void, panelVisible: () => boolean, open: OpenNotification, delayMs = PROGRESS_DELAY_MS): ProgressHandle {
  let last: { done: number; total: number; message?: string } | undefined;
  let notification: Notification | undefined;
  let shown = 0;
  let finish: () => void = () => undefined;
  let ended = false, due = false, opened = false;
  const push = () => {
    if (!notification || !last || last.total <= 0) return;
    const pct = (100 * last.done) / last.total;
    // Whole steps only: some runs report fractions of a step.
    notification.report({ increment: pct - shown, message: `${Math.floor(last.done)}/${Math.round(last.total)}${last.message ? ` · ${last.message}` : ''}` });
    shown = pct;
  };
  /** Opens the notification when it is due and the panel is hidden; true when it opened now (it reports the latest itself). */
  const openIfHidden = (): boolean => {
    if (ended || !due || opened || panelVisible()) return false;
    opened = true;
    open(title, onCancel, (n) => {
      notification = n;
      push();
      return new Promise<void>((resolve) => { finish = resolve; });
    });
    return true;
  };
  const timer = setTimeout(() => { due = true; openIfHidden(); }, delayMs);
  return {
    report: (done, total, message) => { last = { done, total, message }; if (!openIfHidden()) push(); },
    end: () => { ended = true; clearTimeout(timer); finish(); },
  };
}
