// defines: waitForEngine, screen, setTrainingSettings, SMALL_RUN — the steps on the
// workbench's page that more than one e2e file takes, each on the page it is given.
import type { Page } from 'playwright-core';

/**
 * The Training screen's window and batch settings for a run of a few updates that take
 * seconds: windows of 32 tokens (the fixture checkpoint's 32 positions), questions of up
 * to 12 tokens, a stride of 4, batches of 4 with no accumulation. A file adds its epochs
 * (and evaluation interval) after these.
 */
export const SMALL_RUN = {
  maxLength: 32,
  stride: 4,
  maxQueryLength: 12,
  batchSize: 4,
  gradAccumulation: 1,
} as const;

/** Waits until the engine worker has come up (after a load or reload). */
export async function waitForEngine(page: Page): Promise<void> {
  await page.locator('spanwright-app[data-engine="ready"]').waitFor({ timeout: 60_000 });
}

/** Opens a screen by its nav button and waits until the button marks it current. */
export async function screen(page: Page, name: string): Promise<void> {
  await page.locator(`nav button[data-screen="${name}"]`).click();
  await page.locator(`nav button[data-screen="${name}"][aria-current="page"]`).waitFor();
}

/** Sets one of the Training screen's number fields, as typing it and leaving the field would. */
async function setField(page: Page, name: string, value: number): Promise<void> {
  const input = page.locator(`training-screen input[name="${name}"]`);
  // the less used settings are folded: open the field's group
  await input.evaluate((el) => el.closest('details')?.setAttribute('open', ''));
  await input.fill(String(value));
  await input.dispatchEvent('change');
}

/** Sets the Training screen's fields one after another, in the order the object lists them. */
export async function setTrainingSettings(page: Page, settings: Readonly<Record<string, number>>): Promise<void> {
  for (const [name, value] of Object.entries(settings)) await setField(page, name, value);
}
