/**
 * Headless Chromium for the dashboard's browser tests: Debian's `chromium` driven by
 * playwright-core (never a downloaded browser). Tests skip, saying why, only when no Chromium is
 * installed; CI installs it (.ci/run).
 */
import { existsSync } from 'node:fs';
import { mkdir } from 'node:fs/promises';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { type Browser, chromium, type Page } from 'playwright-core';

const CANDIDATES = [process.env.SPARSEWIRE_CHROMIUM, '/usr/bin/chromium', '/usr/bin/chromium-browser'];

export const chromiumPath: string | undefined = CANDIDATES.find((p): p is string => !!p && existsSync(p));

export const missingChromium = chromiumPath
  ? null
  : 'no Chromium found (looked for $SPARSEWIRE_CHROMIUM, /usr/bin/chromium, /usr/bin/chromium-browser); install the Debian package `chromium`';

/** Appended to a browser suite's title, so a skipped run says why in the test report. */
export const SKIP_NOTE = missingChromium ? ` (skipped: ${missingChromium})` : '';

/** Test artifacts (screenshots) go to artifacts/ at the repository root, which git ignores. */
export const ARTIFACTS_DIR = join(dirname(fileURLToPath(import.meta.url)), '..', '..', '..', 'artifacts');

export async function launchChromium(): Promise<Browser> {
  await mkdir(ARTIFACTS_DIR, { recursive: true });
  return chromium.launch({
    executablePath: chromiumPath!,
    args: [
      '--headless',
      '--no-sandbox',
      '--disable-gpu',
      '--disable-background-networking',
      '--disable-component-update',
      '--no-first-run',
      '--disable-sync',
      '--disable-quic',
    ],
  });
}

/** Page errors and console errors, collected so a test can require there were none. */
export function collectPageErrors(page: Page): string[] {
  const errors: string[] = [];
  page.on('pageerror', (err) => errors.push(`page error: ${err.message}`));
  page.on('console', (msg) => {
    if (msg.type() === 'error') errors.push(`console error: ${msg.text()}`);
  });
  return errors;
}

/** Browser steps wait this long by default: CI machines can be slow and busy. */
export const STEP_TIMEOUT_MS = 45_000;
/** A whole browser test may take this long. */
export const BROWSER_TEST_TIMEOUT_MS = 150_000;

/**
 * Runs a browser test body; when it fails, leaves a screenshot of the page as it was in
 * artifacts/<name>-failure.png before passing the failure on.
 */
export async function withFailureShot(page: Page, name: string, body: () => Promise<void>): Promise<void> {
  page.setDefaultTimeout(STEP_TIMEOUT_MS);
  try {
    await body();
  } catch (err) {
    await page.screenshot({ path: join(ARTIFACTS_DIR, `${name}-failure.png`) }).catch(() => undefined);
    throw err;
  }
}
