// Shared pieces of the browser checks: Debian's Chromium through
// playwright-core (nothing downloaded), a tally of named checks, a page
// that records console errors and any request off the local file, and
// axe-core. Every spec file (tests/browser/*.mjs other than this one)
// imports what it needs from here; run.sh runs each spec in turn.
import { chromium } from 'playwright-core';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { createRequire } from 'node:module';

const require = createRequire(import.meta.url);

/** The Chromium every spec uses: the system's, never a download. */
export const CHROMIUM = process.env.CHROMIUM || '/usr/bin/chromium';

/** Launch flags that work on a machine without network or sandbox. */
export const CHROMIUM_ARGS = [
  '--headless',
  '--no-sandbox',
  '--disable-gpu',
  '--disable-quic',
  '--no-first-run',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
];

/**
 * Starts Chromium with a fresh user-data folder; returns a context factory
 * and a close function.
 */
export async function launch() {
  const profile = fs.mkdtempSync(path.join(os.tmpdir(), 'sluice-chromium-'));
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: CHROMIUM,
    args: CHROMIUM_ARGS,
    headless: true,
    viewport: { width: 1400, height: 900 },
  });
  return {
    context,
    async close() {
      await context.close();
      fs.rmSync(profile, { recursive: true, force: true });
    },
  };
}

/** Named checks, printed as `ok: NAME` or `FAILED: NAME (detail)`. */
export class Tally {
  constructor(spec) {
    this.spec = spec;
    this.passed = 0;
    this.failed = 0;
  }

  check(name, ok, detail = '') {
    if (ok) {
      this.passed += 1;
      console.log(`ok: ${name}`);
    } else {
      this.failed += 1;
      console.log(`FAILED: ${name}${detail ? ` (${detail})` : ''}`);
    }
    return ok;
  }

  /** The spec's closing line, which run.sh adds up. */
  finish() {
    console.log(`spec ${this.spec}: ${this.passed} ok, ${this.failed} failed`);
    process.exitCode = this.failed ? 1 : 0;
  }
}

/**
 * Opens `file` in a new page of `context` at `width` x `height` in the
 * colour scheme `scheme`; the returned page records console errors,
 * page errors and requests that leave the file in `page.problems`.
 */
export async function open(context, file, { width, height = 900, scheme = 'light' }) {
  const page = await context.newPage();
  const problems = { console: [], requests: [] };
  page.on('console', (m) => {
    if (m.type() === 'error') problems.console.push(m.text());
  });
  page.on('pageerror', (e) => problems.console.push(String(e)));
  page.on('request', (r) => {
    const url = r.url();
    if (!/^(file|data|about|blob):/.test(url)) problems.requests.push(url);
  });
  await page.setViewportSize({ width, height });
  await page.emulateMedia({ colorScheme: scheme, media: 'screen' });
  await page.goto(`file://${path.resolve(file)}`, { waitUntil: 'load' });
  page.problems = problems;
  return page;
}

const AXE = fs.readFileSync(require.resolve('axe-core/axe.min.js'), 'utf8');

/** axe-core's violations of impact serious or critical, as short words. */
export async function seriousViolations(page) {
  if (!(await page.evaluate(() => typeof window.axe !== 'undefined'))) {
    await page.addScriptTag({ content: AXE });
  }
  const violations = await page.evaluate(async () => {
    const r = await window.axe.run(document, { resultTypes: ['violations'] });
    return r.violations.map((v) => ({
      id: v.id,
      impact: v.impact,
      nodes: v.nodes.slice(0, 3).map((n) => n.target.join(' ')),
    }));
  });
  return violations
    .filter((v) => v.impact === 'serious' || v.impact === 'critical')
    .map((v) => `${v.id} (${v.impact}) at ${v.nodes.join(', ')}`);
}
