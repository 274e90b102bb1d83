// The planning board in Debian's Chromium through playwright-core, used
// as a planner would: leave a test out and see another result come
// earlier, undo, scale a pool's traffic to 0.7 and see results come
// later, pin a start, save the scenario and plan it with `sluice plan
// --scenario`, undo from the keyboard; screenshots at 1400, 768 and 390
// pixels. It starts the board itself (`SLUICE_BIN`, else target/release
// or target/debug), records any request that leaves the board and any
// console error. The closing line is `spec board.mjs: N ok, M failed`.
import { chromium } from 'playwright-core';
import { spawn, execFileSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import readline from 'node:readline';
import { fileURLToPath } from 'node:url';

const here = path.dirname(fileURLToPath(import.meta.url));
const root = path.resolve(here, '../..');
const target = process.env.CARGO_TARGET_DIR ? path.resolve(root, process.env.CARGO_TARGET_DIR) : path.join(root, 'target');
const bin = process.env.SLUICE_BIN ||
  [path.join(target, 'release/sluice'), path.join(target, 'debug/sluice')].find((p) => fs.existsSync(p));
const shots = process.env.SLUICE_SHOTS || path.join(target, 'browser-shots');
const portfolio = 'portfolios/demo.yaml';
fs.mkdirSync(shots, { recursive: true });

let passed = 0;
let failed = 0;
function check(name, ok, detail = '') {
  if (ok) {
    passed += 1;
    console.log(`ok: ${name}`);
  } else {
    failed += 1;
    console.log(`FAILED: ${name}${detail ? ` (${detail})` : ''}`);
  }
  return ok;
}

/** Starts `sluice board` and resolves with its address and the process. */
function startBoard() {
  const child = spawn(bin, ['board', portfolio, '--no-open', '--port', '0'], { cwd: root, stdio: ['ignore', 'pipe', 'pipe'] });
  child.stderr.on('data', (d) => process.stderr.write(d));
  return new Promise((resolve, reject) => {
    const lines = readline.createInterface({ input: child.stdout });
    lines.on('line', (line) => {
      const m = line.match(/^sluice board: (http:\/\/127\.0\.0\.1:\d+\/\?token=[0-9a-f]+)$/);
      if (m) resolve({ child, url: m[1] });
    });
    child.on('exit', (code) => reject(new Error(`the board exited with ${code}`)));
  });
}

/** Each test's result date (null when it has no place), from the page. */
async function results(page) {
  return page.$$eval('#tests > li', (items) => Object.fromEntries(items.map((li) => {
    const r = li.querySelector('[data-field="result"]');
    return [li.dataset.testId, r ? r.textContent : null];
  })));
}

async function startOf(page, id) {
  return page.$eval(`#tests > li[data-test-id="${id}"]`, (li) => {
    const s = li.querySelector('[data-field="start"]');
    return s ? s.textContent : null;
  });
}

/** Runs `act`, then waits until the page shows a later state. */
async function afterChange(page, act) {
  const before = Number(await page.getAttribute('body', 'data-version'));
  await act();
  await page.waitForFunction((v) => Number(document.body.dataset.version) > v, before, { timeout: 60000 });
}

async function openTest(page, id) {
  const d = page.locator(`#tests > li[data-test-id="${id}"] details`);
  if (!(await d.evaluate((e) => e.open))) await d.locator('summary').click();
  return d;
}

const later = (a, b) => a !== null && b !== null && a > b;

async function main() {
  if (!bin) {
    check('a sluice binary is built', false, 'cargo build first');
    return;
  }
  const { child, url } = await startBoard();
  const origin = new URL(url).origin;
  const profile = fs.mkdtempSync(path.join(os.tmpdir(), 'sluice-board-chromium-'));
  const context = await chromium.launchPersistentContext(profile, {
    executablePath: process.env.CHROMIUM || '/usr/bin/chromium',
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
      '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    headless: true,
    viewport: { width: 1400, height: 900 },
    acceptDownloads: true,
  });
  const outside = [];
  const errors = [];
  context.on('request', (r) => {
    const u = r.url();
    if (!u.startsWith(origin) && !u.startsWith('blob:') && !u.startsWith('data:')) outside.push(u);
  });
  try {
    const page = context.pages()[0] || await context.newPage();
    page.on('console', (m) => { if (m.type() === 'error') errors.push(m.text()); });
    page.on('pageerror', (e) => errors.push(String(e)));
    await page.goto(url);
    await page.waitForFunction(() => document.body.dataset.version === '0', null, { timeout: 60000 });
    const start = await results(page);
    check('the page lists every test of the demo', Object.keys(start).length === 37, `${Object.keys(start).length}`);
    const bars = await page.locator('#report').evaluate((h) => h.shadowRoot.querySelectorAll('svg rect').length);
    check('the calendar is drawn from the report', bars > 10, `${bars} rects`);

    // Leave a test out: another result comes earlier.
    await openTest(page, 'home-static-hero');
    await afterChange(page, () => page.locator('#tests > li[data-test-id="home-static-hero"] input[type=checkbox]').uncheck());
    const left = await results(page);
    check('the left-out test has no place', left['home-static-hero'] === null);
    const status = await page.locator('#tests > li[data-test-id="home-static-hero"] .why').textContent();
    check('its reason says it was left out', /left out by the scenario/.test(status), status);
    const earlier = Object.keys(start).filter((id) => id !== 'home-static-hero' && later(start[id], left[id]));
    check('another test\'s result comes earlier', earlier.length > 0, JSON.stringify(earlier));
    const headline = await page.locator('#moved-headline').textContent();
    check('what moved is said in the re-plan\'s words', /earlier/.test(headline), headline);

    // Undo: back to the starting plan.
    await afterChange(page, () => page.click('#undo'));
    const undone = await results(page);
    check('undo brings the starting calendar back', JSON.stringify(undone) === JSON.stringify(start));

    // Scale a pool to 0.7: results come later.
    const product = page.locator('#pools > li[data-pool-id="product"]');
    await product.locator('input[name=scale]').fill('0.7');
    await afterChange(page, () => product.locator('button').click());
    const scaled = await results(page);
    const slipped = Object.keys(start).filter((id) => later(scaled[id], start[id]));
    check('scaling product pages to 0.7 moves results later', slipped.length > 0, JSON.stringify(slipped));

    // Pin a start.
    const pin = await openTest(page, 'home-cookie-copy');
    await pin.locator('input[name=start]').fill('2027-02-15');
    await afterChange(page, () => pin.locator('form[data-edit=start] button[value=set]').click());
    check('the pinned test starts on its day', (await startOf(page, 'home-cookie-copy')) === '2027-02-15',
      await startOf(page, 'home-cookie-copy'));

    // Save the scenario; the command line plans it byte for byte the same.
    const [download] = await Promise.all([page.waitForEvent('download'), page.click('#save')]);
    const saved = path.join(profile, 'scenario.yaml');
    await download.saveAs(saved);
    const yaml = fs.readFileSync(saved, 'utf8');
    check('the saved scenario lists both edits', /pool: product/.test(yaml) && /home-cookie-copy/.test(yaml), yaml);
    const token = new URL(url).searchParams.get('token');
    const fromBoard = await (await fetch(`${origin}/api/plan.json`, { headers: { 'X-Sluice-Token': token } })).text();
    const fromCli = execFileSync(bin, ['plan', portfolio, '--scenario', saved, '--format', 'json', '--no-timing'],
      { cwd: root, encoding: 'utf8', maxBuffer: 64 << 20 });
    check('sluice plan --scenario gives the board\'s plan byte for byte', fromCli === fromBoard);

    // Keyboard: Ctrl+Z undoes the pin.
    await page.locator('#filter').focus();
    await page.keyboard.press('Tab');
    await page.locator('body').focus();
    await afterChange(page, () => page.keyboard.press('Control+z'));
    const steps = await page.locator('#steps li').count();
    check('Ctrl+Z undoes the last change', steps === 1, `${steps} steps`);
    await page.locator('#undo').focus();
    await afterChange(page, () => page.keyboard.press('Enter'));
    check('the Undo button works from the keyboard', (await page.locator('#steps li').count()) === 0);

    // A state worth a picture for the README, then three widths.
    await openTest(page, 'home-static-hero');
    await afterChange(page, () => page.locator('#tests > li[data-test-id="home-static-hero"] input[type=checkbox]').uncheck());
    await product.locator('input[name=scale]').fill('0.8');
    await afterChange(page, () => product.locator('button').click());
    for (const [w, h] of [[1400, 900], [768, 1024], [390, 844]]) {
      await page.setViewportSize({ width: w, height: h });
      await page.evaluate(() => window.scrollTo(0, 0));
      await page.waitForTimeout(200);
      const wide = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
      check(`nothing runs off the side at ${w} px`, wide <= 1, `${wide} px too wide`);
      await page.screenshot({ path: path.join(shots, `board-${w}.png`) });
    }
    if (process.env.SLUICE_README_SHOT) {
      await page.setViewportSize({ width: 1400, height: 900 });
      await page.evaluate(() => window.scrollTo(0, 0));
      await page.waitForTimeout(200);
      await page.screenshot({ path: process.env.SLUICE_README_SHOT });
    }
    check('no request left the board', outside.length === 0, outside.join(' '));
    check('no console errors', errors.length === 0, errors.join(' | '));
  } catch (e) {
    check('the spec runs to its end', false, e.stack || String(e));
  } finally {
    await context.close();
    fs.rmSync(profile, { recursive: true, force: true });
    child.kill('SIGINT');
  }
}

await main();
console.log(`screenshots: ${shots}`);
console.log(`spec board.mjs: ${passed} ok, ${failed} failed`);
process.exitCode = failed ? 1 : 0;
