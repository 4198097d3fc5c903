/**
 * A real browser for the report's tests: Debian's `chromium` package (never a browser
 * download), driven by playwright-core over the DevTools protocol. `.ci/run` installs
 * the package when it is missing. Locally a missing browser skips these tests; with
 * CI=true it fails the run, never a silent skip.
 */
import { existsSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext } from 'playwright-core';

/** Where the browser is: PAIRFLOW_CHROMIUM, else Debian's /usr/bin/chromium. */
export const CHROMIUM = process.env.PAIRFLOW_CHROMIUM ?? '/usr/bin/chromium';

/** Flags that keep a headless Chromium off the network and quiet on a shared machine. */
export const CHROMIUM_FLAGS = [
  '--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
  '--disable-background-networking', '--disable-component-update', '--disable-sync',
];

/** Whether the browser can be used; throws under CI=true when it cannot. */
export function haveChromium(): boolean {
  const ok = existsSync(CHROMIUM);
  if (!ok && (process.env.CI === 'true' || process.env.CI === '1')) {
    throw new Error(`CI=true but no browser at ${CHROMIUM} (apt-get install -y chromium)`);
  }
  return ok;
}

/** A fresh browser with a fresh profile (its own user-data-dir). */
export async function launch(): Promise<BrowserContext> {
  const profile = mkdtempSync(join(tmpdir(), 'pairflow-chromium-'));
  return chromium.launchPersistentContext(profile, {
    executablePath: CHROMIUM,
    headless: true,
    args: CHROMIUM_FLAGS,
    viewport: { width: 1100, height: 1400 },
  });
}
