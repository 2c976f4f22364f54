/**
 * Debian Chromium driving the code-server workbench the way a user does: Explorer clicks,
 * context menus, quick picks, and the extension's webview (two iframes below the page).
 */
import { existsSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { BrowserContext, Frame, Locator, Page, chromium } from 'playwright-core';
import { ScratchDirs, isolatedEnv } from './code-server';

export const CHROMIUM = '/usr/bin/chromium';
const ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking',
  '--disable-component-update', '--disable-sync'];

export interface Workbench { page: Page; context: BrowserContext; close(): Promise<void> }

/** Chromium with a fresh profile inside the scratch folder, opened on the workspace folder. */
export async function openWorkbench(d: ScratchDirs, url: string, folder: string, viewport = { width: 1440, height: 900 }): Promise<Workbench> {
  if (!existsSync(CHROMIUM)) throw new Error(`${CHROMIUM} is missing: apt-get install -y chromium`);
  const profile = join(d.root, 'chromium-profile');
  mkdirSync(profile, { recursive: true });
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: CHROMIUM, headless: true, args: ARGS, env: isolatedEnv(d) as Record<string, string>, viewport,
  });
  const page = context.pages()[0] ?? await context.newPage();
  await page.goto(`${url}/?folder=${encodeURIComponent(folder)}`);
  return { page, context, close: () => context.close() };
}

/** An Explorer row whose name is exactly `name`. */
export function explorerRow(page: Page, name: string): Locator {
  return page.locator('.explorer-folders-view .monaco-list-row')
    .filter({ has: page.locator('.label-name', { hasText: new RegExp(`^${name.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}$`) }) });
}

/** Expands the folders along `path` in the Explorer (collapsed ones only) and returns the last row. */
export async function revealInExplorer(page: Page, path: string[], timeout: number): Promise<Locator> {
  let row: Locator | undefined;
  for (const [i, name] of path.entries()) {
    row = explorerRow(page, name).first();
    await row.waitFor({ state: 'visible', timeout });
    const isFolder = i < path.length - 1;
    if (isFolder && (await row.getAttribute('aria-expanded')) === 'false') await row.click();
  }
  return row!;
}

/** The quick-pick row whose label contains `text`; waits for the quick input to show it. */
export function quickPickRow(page: Page, text: string): Locator {
  return page.locator('.quick-input-widget .quick-input-list .monaco-list-row', { hasText: text });
}

/**
 * The frame that holds the element `selector`, among every frame of the page (an extension's
 * webview content is two iframes deep: iframe.webview > #active-frame).
 */
export async function frameWith(page: Page, selector: string, timeout: number): Promise<Frame> {
  const deadline = Date.now() + timeout;
  for (;;) {
    for (const f of page.frames()) {
      if (f === page.mainFrame()) continue;
      try { if (await f.$(selector)) return f; } catch { /* frame navigated or detached meanwhile */ }
    }
    if (Date.now() > deadline) throw new Error(`no webview frame shows ${selector} after ${timeout / 1000} s`);
    await new Promise((r) => setTimeout(r, 250));
  }
}
