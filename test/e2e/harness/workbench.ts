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
export async function openWorkbench(d: ScratchDirs, url: string, folder: string, viewport = { width: 1600, height: 1300 }): Promise<Workbench> {
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

const exactly = (text: string) => new RegExp(`^${text.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}$`);

/** An Explorer row whose name is exactly `name`. */
export function explorerRow(page: Page, name: string): Locator {
  return page.locator('.explorer-folders-view .monaco-list-row').filter({ has: page.locator('.label-name', { hasText: exactly(name) }) });
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

/** The quick-pick rows whose label contains `text`, or is exactly `text`. */
export function quickPickRow(page: Page, text: string, exact = false): Locator {
  const rows = page.locator('.quick-input-widget .quick-input-list .monaco-list-row');
  return exact ? rows.filter({ has: page.locator('.label-name', { hasText: exactly(text) }) }) : rows.filter({ hasText: text });
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

/**
 * Runs a command from the palette by its title. A contributed command can be missing on the
 * first try (the extension host registers it a little after the workbench shows): retry.
 */
export async function runFromPalette(page: Page, title: string, tries = 5): Promise<void> {
  const input = page.locator('.quick-input-widget input');
  for (let attempt = 1; ; attempt++) {
    try {
      // Focus can sit inside a webview or a notification, where F1 never reaches the workbench:
      // give it to the side bar's title (plain workbench DOM), or the active tab, and fall back
      // to the other palette key.
      const focusTarget = attempt % 2 === 1 ? '.part.sidebar .composite.title' : '.part.editor .tabs-container .tab.active';
      await page.locator(focusTarget).first().click();
      await page.keyboard.press(attempt % 2 === 1 ? 'F1' : 'Control+Shift+P');
      await input.waitFor({ state: 'visible', timeout: 5_000 });
      await input.fill(`>${title}`);
      const row = quickPickRow(page, title, true).first();
      await row.waitFor({ state: 'visible', timeout: 3_000 });
      await row.click();
      return;
    } catch (e) {
      await page.keyboard.press('Escape');
      if (attempt === tries) throw new Error(`the command palette never offered "${title}" (${tries} tries): ${(e as Error).message}`);
    }
  }
}

/** Picks a colour theme the way a user does (Preferences: Color Theme, type its name, Enter). */
export async function pickColorTheme(page: Page, label: string): Promise<void> {
  await runFromPalette(page, 'Preferences: Color Theme');
  const input = page.locator('.quick-input-widget input');
  await input.fill(label);
  const row = quickPickRow(page, label, true).first();
  await row.waitFor({ state: 'visible', timeout: 10_000 });
  await row.click();
  await page.locator('.quick-input-widget').waitFor({ state: 'hidden', timeout: 10_000 });
}
