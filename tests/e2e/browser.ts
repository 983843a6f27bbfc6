// defines: openBrowser — Debian's Chromium driven by playwright-core for the workbench's
// end-to-end tests, with the launch flags docs/DESIGN.md gives and a fresh profile each time.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext } from 'playwright-core';

export const CHROMIUM = process.env.CHROMIUM_PATH ?? '/usr/bin/chromium';

const FLAGS = [
  '--headless',
  '--no-sandbox',
  '--disable-gpu',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
  '--no-first-run',
];

export interface OpenBrowser {
  context: BrowserContext;
  downloads: string;
  close(): Promise<void>;
}

/** A persistent context in a new temporary profile (IndexedDB and the cache survive reloads). */
export async function openBrowser(): Promise<OpenBrowser> {
  const profile = mkdtempSync(join(tmpdir(), 'spanwright-e2e-'));
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: CHROMIUM,
    headless: true,
    args: FLAGS,
    acceptDownloads: true,
    viewport: { width: 1280, height: 900 },
  });
  return {
    context,
    downloads: profile,
    async close() {
      await context.close();
      rmSync(profile, { recursive: true, force: true });
    },
  };
}
