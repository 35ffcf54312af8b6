import { existsSync } from 'node:fs';
import chromiumPackage from '@sparticuz/chromium';
import { chromium, type BrowserContext } from 'playwright-core';

/**
 * A headless Chromium for the review-sheet suite, with nothing to install beside `npm ci`: the browser the
 * npm package @sparticuz/chromium carries inside itself (unpacked into the temporary folder on first use).
 * Debian's /usr/bin/chromium is the fallback, used only when the package cannot give one.
 */

/** The package's flags that loosen a page's security: left out, so the page is tested as a reviewer's browser shows it. */
const LOOSENING = new Set(['--disable-web-security', '--allow-running-insecure-content', '--disable-site-isolation-trials']);
/** Quiet and offline: no first-run pages, no background updates or sync. */
const OWN_FLAGS = [
  '--no-sandbox',
  '--disable-gpu',
  '--disable-quic',
  '--no-first-run',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
];
const DEBIAN_CHROMIUM = '/usr/bin/chromium';

async function browserBinary(): Promise<{ executablePath: string; args: string[]; source: string }> {
  try {
    const executablePath = await chromiumPackage.executablePath();
    const args = chromiumPackage.args.filter((flag) => !LOOSENING.has(flag));
    return { executablePath, args, source: '@sparticuz/chromium' };
  } catch (error) {
    if (existsSync(DEBIAN_CHROMIUM)) return { executablePath: DEBIAN_CHROMIUM, args: ['--headless'], source: DEBIAN_CHROMIUM };
    throw new Error(
      `no browser for the review-sheet test: @sparticuz/chromium failed (${(error as Error).message}) and ${DEBIAN_CHROMIUM} is not there; run npm ci`,
    );
  }
}

/**
 * Starts Chromium headless with a fresh profile folder (nothing remembered from earlier runs or other programs).
 *
 * @example
 *   const { context } = await launchChromium(profileDir);
 *   const page = context.pages()[0] ?? (await context.newPage());
 */
export async function launchChromium(profile: string): Promise<{ context: BrowserContext; source: string }> {
  const binary = await browserBinary();
  const args = [...new Set([...binary.args, ...OWN_FLAGS])];
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: binary.executablePath,
    headless: true,
    args,
    viewport: { width: 1280, height: 900 },
  });
  return { context, source: binary.source };
}
