// The HTML report in Chromium: at each width (desktop 1400, tablet 768,
// phone 390 px), light and dark, and on paper (A4 and US Letter,
// landscape).
//
// Reads the reports to check from the manifest in $SLUICE_REPORTS (JSON:
// [{"name", "html", "json"}], the JSON being the same plan rendered as
// JSON, which says which tests are scheduled and when their results are
// due) and writes screenshots and PDF pages to $SLUICE_SHOTS. run.sh makes
// both. $SLUICE_WIDTHS and $SLUICE_SCHEMES narrow the runs.
import fs from 'node:fs';
import path from 'node:path';
import { execFileSync } from 'node:child_process';
import { Tally, launch, open, seriousViolations } from './lib.mjs';

const reports = JSON.parse(fs.readFileSync(process.env.SLUICE_REPORTS, 'utf8'));
const shots = process.env.SLUICE_SHOTS;
const widths = (process.env.SLUICE_WIDTHS || '1400,768,390').split(',').map(Number);
const schemes = (process.env.SLUICE_SCHEMES || 'light,dark').split(',');
const tally = new Tally('report.mjs');
const MONTHS = ['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'];

/** The ways the report writes a date: 2027-06-14 and 14 Jun. */
function dateWords(iso) {
  const [, m, d] = iso.split('-').map(Number);
  return [iso, `${d} ${MONTHS[m - 1]}`];
}

/** Scheduled and running tests with a result date, from the plan's JSON. */
function dueTests(plan) {
  return plan.experiments
    .filter((e) => e.result_date && (e.status === 'scheduled' || e.status === 'running'))
    .map((e) => ({ id: e.id, words: dateWords(e.result_date) }));
}

// --- checks run inside the page ------------------------------------------

/** Text drawn smaller than 11 CSS pixels (an SVG's scale included). */
function smallText() {
  const bad = [];
  const walker = document.createTreeWalker(document.body, NodeFilter.SHOW_TEXT);
  for (let n = walker.nextNode(); n; n = walker.nextNode()) {
    const el = n.parentElement;
    if (!n.textContent.trim() || !el || el.closest('title, desc, .sr')) continue;
    if (!el.checkVisibility({ checkOpacity: true, checkVisibilityCSS: true })) continue;
    const box = el.getBoundingClientRect();
    if (box.width < 2 || box.height < 2) continue;
    let size = parseFloat(getComputedStyle(el).fontSize);
    if (el instanceof SVGElement && el.getScreenCTM()) {
      const m = el.getScreenCTM();
      size *= Math.hypot(m.a, m.b);
    }
    if (size < 10.95) bad.push(`${size.toFixed(1)}px "${n.textContent.trim().slice(0, 30)}"`);
  }
  return bad;
}

/** Whether the page, or its body, is wider than the window. */
function sidewaysOverflow() {
  const w = window.innerWidth;
  const doc = document.documentElement.scrollWidth;
  const body = document.body.scrollWidth;
  return doc > w || body > w ? `page ${doc}px, body ${body}px, window ${w}px` : '';
}

/** Legend icons larger than 48 px either way (or not drawn at all). */
function bigIcons() {
  const icons = [...document.querySelectorAll('ul.legend svg')];
  if (!icons.length) return ['no legend icons'];
  return icons
    .map((i) => i.getBoundingClientRect())
    .filter((r) => r.width > 48 || r.height > 48 || r.width === 0)
    .map((r) => `${Math.round(r.width)}x${Math.round(r.height)}`);
}

/**
 * Whether some element of the test (`[data-test=id]`) shows one of
 * `words` in its own text where it can be seen without hovering: rendered,
 * brought into view, inside every frame that clips it, and not covered.
 */
function dateShown([id, words]) {
  const owners = [...document.querySelectorAll(`[data-test="${CSS.escape(id)}"]`)];
  const candidates = owners.flatMap((o) => [o, ...o.querySelectorAll('*')]).filter((el) => {
    if (el.closest('title, desc')) return false;
    const own = [...el.childNodes]
      .filter((c) => c.nodeType === Node.TEXT_NODE)
      .map((c) => c.textContent)
      .join('');
    return words.some((w) => own.includes(w));
  });
  for (const el of candidates) {
    if (!el.checkVisibility({ checkOpacity: true, checkVisibilityCSS: true })) continue;
    el.scrollIntoView({ block: 'center', inline: 'center' });
    const r = el.getBoundingClientRect();
    if (r.width < 1 || r.height < 1) continue;
    let box = { left: 0, top: 0, right: window.innerWidth, bottom: window.innerHeight };
    for (let a = el.parentElement; a; a = a.parentElement) {
      const s = getComputedStyle(a);
      if (s.overflowX !== 'visible' || s.overflowY !== 'visible') {
        const c = a.getBoundingClientRect();
        box = {
          left: Math.max(box.left, c.left),
          top: Math.max(box.top, c.top),
          right: Math.min(box.right, c.right),
          bottom: Math.min(box.bottom, c.bottom),
        };
      }
    }
    const inside =
      r.left >= box.left - 1 && r.right <= box.right + 1 && r.top >= box.top - 1 && r.bottom <= box.bottom + 1;
    if (!inside) continue;
    const hit = document.elementFromPoint((r.left + r.right) / 2, (r.top + r.bottom) / 2);
    if (hit && (el.contains(hit) || hit.contains(el))) return true;
  }
  return false;
}

/**
 * Bar labels that are cut: running out of their drawing, inside a bar but
 * longer than it, or crossed by an interim look's tick or the result's
 * diamond.
 */
function cutLabels() {
  const bad = [];
  for (const g of document.querySelectorAll('g.bar')) {
    const svg = g.ownerSVGElement;
    if (!svg.checkVisibility()) continue;
    const label = g.querySelector('text');
    if (!label) {
      bad.push('a bar without a label');
      continue;
    }
    const b = label.getBBox();
    const [l, r] = [b.x, b.x + b.width];
    const view = svg.viewBox.baseVal;
    const words = label.textContent;
    if (l < view.x - 0.5 || r > view.x + view.width + 0.5) bad.push(`"${words}" runs out of its row`);
    const bar = g.querySelector('rect');
    const bx = bar.x.baseVal.value;
    const bw = bar.width.baseVal.value;
    if (label.classList.contains('on-bar') && (l < bx || r > bx + bw)) bad.push(`"${words}" is longer than its bar`);
    for (const t of g.querySelectorAll('line.look')) {
      const x = t.x1.baseVal.value;
      if (x > l - 1.5 && x < r + 1.5) bad.push(`"${words}" is crossed by a look tick`);
    }
    const due = g.querySelector('path.due');
    if (due) {
      const d = due.getBBox();
      if (d.x < r && d.x + d.width > l) bad.push(`"${words}" is crossed by the result's diamond`);
    }
  }
  return bad;
}

/**
 * Pool names that are not shown whole, and visible, in the calendar and
 * beside each pool's traffic chart.
 */
function cutPoolNames(labels) {
  const shown = (root) => {
    if (!root) return '';
    let text = '';
    const walker = document.createTreeWalker(root, NodeFilter.SHOW_TEXT);
    for (let n = walker.nextNode(); n; n = walker.nextNode()) {
      const el = n.parentElement;
      if (el.closest('title, desc, .sr') || !el.checkVisibility({ checkVisibilityCSS: true })) continue;
      text += n.textContent + '\n';
    }
    return text;
  };
  const calendar = shown(document.getElementById('calendar')?.closest('section'));
  const traffic = shown(document.getElementById('traffic')?.closest('section'));
  return labels.filter((l) => !calendar.includes(l) || !traffic.includes(l));
}

/** The page's own colours: whether it is dark, and text light on it. */
function colours() {
  const lum = (c) => {
    const [r, g, b] = c.match(/[\d.]+/g).slice(0, 3).map((v) => {
      const s = Number(v) / 255;
      return s <= 0.03928 ? s / 12.92 : ((s + 0.055) / 1.055) ** 2.4;
    });
    return 0.2126 * r + 0.7152 * g + 0.0722 * b;
  };
  const s = getComputedStyle(document.body);
  const back = lum(s.backgroundColor);
  const ink = lum(s.color);
  return { back, ink, ratio: (Math.max(back, ink) + 0.05) / (Math.min(back, ink) + 0.05) };
}

/**
 * Bars whose shape is lost against the page: each run's bar, by its fill
 * or its outline, must stand 3:1 from the background (WCAG 2.1's
 * non-text contrast, SC 1.4.11).
 */
function faintBars() {
  const lum = (c) => {
    const m = (c || '').match(/[\d.]+/g);
    if (!m || m.length < 3) return null;
    const [r, g, b] = m.slice(0, 3).map((v) => {
      const s = Number(v) / 255;
      return s <= 0.03928 ? s / 12.92 : ((s + 0.055) / 1.055) ** 2.4;
    });
    return 0.2126 * r + 0.7152 * g + 0.0722 * b;
  };
  const ratio = (a, b) => (Math.max(a, b) + 0.05) / (Math.min(a, b) + 0.05);
  const back = lum(getComputedStyle(document.body).backgroundColor);
  const bad = [];
  for (const rect of document.querySelectorAll('rect.run')) {
    const st = getComputedStyle(rect);
    const fill = lum(st.fill);
    const stroke = st.stroke === 'none' || parseFloat(st.strokeWidth) < 1 ? null : lum(st.stroke);
    const best = Math.max(fill === null ? 0 : ratio(fill, back), stroke === null ? 0 : ratio(stroke, back));
    if (best < 3) bad.push(`${rect.closest('[data-test]')?.dataset.test}: ${best.toFixed(2)}:1`);
  }
  return bad;
}

/**
 * Rows whose state is told by colour alone: each calendar row must say its
 * facts in words (`aria-label`), and a test without a run must say why in
 * visible text, not only by a missing bar.
 */
function colourOnly(closed) {
  const bad = [];
  for (const row of document.querySelectorAll('.cal-row[data-test]')) {
    const label = row.querySelector('svg')?.getAttribute('aria-label') || '';
    if (!label.includes(row.dataset.test)) bad.push(`${row.dataset.test}: no words for its row`);
  }
  for (const [id, words] of closed) {
    const rows = [...document.querySelectorAll(`.cal-row[data-test="${CSS.escape(id)}"]`)];
    if (!rows.length || !rows.every((r) => words.some((w) => r.textContent.includes(w)))) bad.push(`${id}: its state is not in words`);
  }
  return bad;
}

// --- the runs -------------------------------------------------------------

const { context, close } = await launch();
try {
  for (const report of reports) {
    const plan = JSON.parse(fs.readFileSync(report.json, 'utf8'));
    const due = dueTests(plan);
    const pools = plan.pools.map((p) => p.label);
    const bytes = fs.statSync(report.html).size;
    tally.check(`${report.name}: the report is under 1 MB (${(bytes / 1024).toFixed(0)} KB)`, bytes < 1_000_000);
    for (const width of widths) {
      for (const scheme of schemes) {
        const at = `${report.name} at ${width}px, ${scheme}`;
        const page = await open(context, report.html, { width, scheme });
        const c = await page.evaluate(colours);
        tally.check(
          `${at}: the page follows the ${scheme} colour scheme with contrast kept`,
          (scheme === 'dark' ? c.back < 0.05 && c.ink > 0.5 : c.back > 0.9 && c.ink < 0.05) && c.ratio >= 7,
          `background luminance ${c.back.toFixed(2)}, text ${c.ink.toFixed(2)}, ratio ${c.ratio.toFixed(1)}`
        );
        const over = await page.evaluate(sidewaysOverflow);
        tally.check(`${at}: the page never scrolls sideways`, !over, over);
        const small = await page.evaluate(smallText);
        tally.check(`${at}: no text under 11px`, !small.length, small.slice(0, 4).join('; '));
        const icons = await page.evaluate(bigIcons);
        tally.check(`${at}: legend icons are at most 48px`, !icons.length, icons.slice(0, 3).join(', '));
        const cut = await page.evaluate(cutLabels);
        tally.check(`${at}: no bar label is cut`, !cut.length, cut.slice(0, 3).join('; '));
        const closed = plan.experiments
          .filter((e) => !e.result_date || ['finished', 'cancelled', 'unscheduled'].includes(e.status))
          .filter((e) => e.status !== 'running' && e.status !== 'scheduled')
          .map((e) => [e.id, e.status === 'unscheduled' ? ['does not fit'] : [e.status]]);
        const faint = await page.evaluate(faintBars);
        tally.check(`${at}: every bar stands 3:1 from the page`, !faint.length, faint.slice(0, 3).join('; '));
        const colour = await page.evaluate(colourOnly, closed);
        tally.check(`${at}: no test's state is told by colour alone (${closed.length} without a run)`, !colour.length, colour.slice(0, 3).join('; '));
        if (width === 768 && scheme === 'light') {
          // The keyboard reaches the calendar's frame and scrolls it.
          await page.evaluate(() => {
            document.querySelectorAll('.frame').forEach((f) => (f.scrollLeft = 0));
            document.activeElement?.blur();
            window.scrollTo(0, 0);
          });
          let reached = false;
          for (let i = 0; i < 30 && !reached; i++) {
            await page.keyboard.press('Tab');
            reached = await page.evaluate(() => document.activeElement?.classList.contains('cal'));
          }
          let scrolled = 0;
          if (reached) {
            for (let i = 0; i < 6; i++) await page.keyboard.press('ArrowRight');
            // Arrow keys scroll smoothly: wait for the frame to move.
            await page
              .waitForFunction(() => document.activeElement.scrollLeft > 0, null, { timeout: 3000 })
              .catch(() => {});
            scrolled = await page.evaluate(() => document.activeElement.scrollLeft);
          }
          tally.check(`${at}: the keyboard reaches the calendar and scrolls it sideways`, reached && scrolled > 0, reached ? 'it did not scroll' : 'never focused');
        }
        const names = await page.evaluate(cutPoolNames, pools);
        tally.check(`${at}: every pool's name is shown whole`, !names.length, names.join(', '));
        const hidden = [];
        for (const t of due) {
          if (!(await page.evaluate(dateShown, [t.id, t.words]))) hidden.push(t.id);
        }
        tally.check(
          `${at}: each of ${due.length} scheduled tests shows its result date without hovering`,
          due.length > 0 && !hidden.length,
          hidden.length ? `hidden for ${hidden.slice(0, 5).join(', ')}` : 'no scheduled test'
        );
        await page.evaluate(() => window.scrollTo(0, 0));
        await page.evaluate(() => document.querySelectorAll('.frame').forEach((f) => (f.scrollLeft = 0)));
        await page.screenshot({ path: path.join(shots, `${report.name}-${width}-${scheme}.png`), fullPage: true });
        const axe = await seriousViolations(page);
        tally.check(`${at}: axe-core finds no serious or critical violation`, !axe.length, axe.slice(0, 3).join('; '));
        tally.check(`${at}: no console errors`, !page.problems.console.length, page.problems.console.slice(0, 2).join('; '));
        tally.check(`${at}: no network requests`, !page.problems.requests.length, page.problems.requests.slice(0, 2).join(', '));
        await page.close();
      }
    }
    await paper(report, pools);
  }
} finally {
  await close();
}
tally.finish();

/**
 * On paper: A4 and US Letter landscape. The printed layout fits the
 * page's width with no controls, a page break before each pool's rows,
 * rows that never break, and the cautions last; each PDF's pages are
 * turned into PNGs with pdftoppm for a person to look at.
 */
async function paper(report, pools) {
  // Printable widths at 96 px per inch with 10 mm margins.
  const sizes = [
    { format: 'A4', width: Math.floor(((297 - 20) / 25.4) * 96), height: Math.floor(((210 - 20) / 25.4) * 96) },
    { format: 'Letter', width: Math.floor(((279.4 - 20) / 25.4) * 96), height: Math.floor(((215.9 - 20) / 25.4) * 96) },
  ];
  for (const size of sizes) {
    const at = `${report.name} on ${size.format} landscape`;
    const page = await open(context, report.html, { width: size.width, scheme: 'light' });
    await page.emulateMedia({ media: 'print', colorScheme: 'light' });
    const layout = await page.evaluate((pageHeight) => {
      const shown = (sel) => [...document.querySelectorAll(sel)].filter((e) => e.checkVisibility()).length;
      const rows = [...document.querySelectorAll('.cal-row')];
      return {
        overflow: document.documentElement.scrollWidth - window.innerWidth,
        controls: shown('nav, button, input, select, .pool-lists'),
        widest: Math.max(...[...document.querySelectorAll('svg')].map((s) => s.getBoundingClientRect().right)),
        unbroken: rows.every((r) => getComputedStyle(r).breakInside === 'avoid' && r.getBoundingClientRect().height < pageHeight),
        poolBreaks: [...document.querySelectorAll('.cal-pool')].slice(1).every((p) => getComputedStyle(p).breakBefore === 'page'),
        rows: rows.length,
      };
    }, size.height);
    tally.check(`${at}: nothing wider than the page`, layout.overflow <= 0 && layout.widest <= size.width + 0.5, `${layout.overflow}px over, widest ${layout.widest}px`);
    tally.check(`${at}: no controls`, layout.controls === 0, `${layout.controls} shown`);
    tally.check(`${at}: ${layout.rows} calendar rows that never break across pages`, layout.rows > 0 && layout.unbroken);
    tally.check(`${at}: a page break before each pool`, layout.poolBreaks);
    const pdf = path.join(shots, `${report.name}-${size.format}.pdf`);
    await page.pdf({ path: pdf, format: size.format, landscape: true, printBackground: true, preferCSSPageSize: false });
    await page.close();
    let text = '';
    try {
      text = execFileSync('pdftotext', ['-layout', pdf, '-'], { encoding: 'utf8' });
      execFileSync('pdftoppm', ['-png', '-r', '60', pdf, path.join(shots, `${report.name}-${size.format}-page`)]);
    } catch (e) {
      tally.check(`${at}: pdftotext and pdftoppm read the PDF`, false, String(e).slice(0, 120));
      continue;
    }
    const pages = text.split('\f').filter((p) => p.trim());
    const pngs = fs.readdirSync(shots).filter((f) => f.startsWith(`${report.name}-${size.format}-page`));
    tally.check(`${at}: ${pages.length} pages, each turned into a PNG`, pages.length > 1 && pngs.length === pages.length, `${pngs.length} PNGs`);
    const where = (words) => pages.findIndex((p) => p.includes(words));
    const cautions = where('Assumptions and cautions');
    tally.check(`${at}: the cautions come at the end`, cautions >= 0 && cautions >= where('How this plan was made') && cautions >= where('Tests that do not fit'), `page ${cautions + 1} of ${pages.length}`);
    const first = pools.map((p) => pages.findIndex((t) => t.includes(`${p} ·`)));
    tally.check(`${at}: each pool's calendar starts a page of its own`, first.every((p) => p >= 0) && new Set(first).size === first.length, first.join(','));
  }
}

