/** Launches Debian Chromium headless with a fresh profile and opens the panel page with a scripted host. */
import { mkdtempSync, rmSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, BrowserContext, Page } from 'playwright-core';
import { ScriptedHost } from './scripted-host';
import { initMessage } from './synthetic-scene';
import { ThemeKind, startPageServer } from './page-server';

export const CHROMIUM = '/usr/bin/chromium';
const ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--disable-background-networking',
  '--disable-component-update', '--disable-sync', '--no-first-run'];

export interface OpenPanel {
  page: Page;
  host: ScriptedHost;
  pageErrors: string[];
  consoleErrors: string[];
  close(): Promise<void>;
}

export interface Browser {
  /** `failOpen`: the host answers ready with this error instead of init. */
  open(theme: ThemeKind, viewport: { width: number; height: number }, failOpen?: { message: string; hint?: string }): Promise<OpenPanel>;
  close(): Promise<void>;
}

export async function launchBrowser(): Promise<Browser> {
  if (!existsSync(CHROMIUM)) throw new Error(`${CHROMIUM} is missing: run apt-get install -y chromium`);
  const profile = mkdtempSync(join(tmpdir(), 'factfoil-chromium-'));
  const context: BrowserContext = await chromium.launchPersistentContext(profile, { executablePath: CHROMIUM, headless: true, args: ARGS });
  const server = await startPageServer();
  const init = await initMessage();
  return {
    async open(theme, viewport, failOpen) {
      const page = await context.newPage();
      await page.setViewportSize(viewport);
      const host = new ScriptedHost(page, init);
      if (failOpen) host.failOpen = failOpen;
      await host.attach();
      const pageErrors: string[] = [];
      const consoleErrors: string[] = [];
      page.on('pageerror', (e) => pageErrors.push(e.message));
      page.on('console', (m) => { if (m.type() === 'error') consoleErrors.push(m.text()); });
      await page.goto(server.url(theme));
      await host.waitFor('ready');
      await page.waitForSelector(`.ff-panel[data-state="${failOpen ? 'failed' : 'ready'}"]`);
      return { page, host, pageErrors, consoleErrors, close: () => page.close() };
    },
    async close() {
      await context.close();
      await server.close();
      rmSync(profile, { recursive: true, force: true });
    },
  };
}
