/**
 * The checks every view of the sheet must pass, as browser-side code (text: this project's type
 * check has no DOM library): no text overflowing its box (a box with its own scroll counts as
 * holding its text), and no NaN, null or undefined shown. The same rule as the overflow check of
 * dashboard.test.ts, with the boxes of the newer views (records, intake) added.
 */
export const SHEET_CHECK = `(() => {
  const boxes = 'main, aside, .entry, .panel, .stat-card, .feed-item, .tp-card, .result-box, .view-head, .masthead, .record-block, .range-bar';
  const clipped = (el) => { for (let a = el.parentElement; a; a = a.parentElement) { const o = getComputedStyle(a).overflowX; if (o === 'auto' || o === 'scroll') return true; if (a.matches(boxes)) return false; } return false; };
  const bad = [];
  for (const el of document.querySelectorAll('main *, aside *, header *')) {
    if (el.offsetParent === null || el.closest('.chart')) continue;
    if (![...el.childNodes].some((n) => n.nodeType === 3 && n.textContent.trim())) continue;
    const container = el.closest(boxes);
    if (!container || container === el || clipped(el)) continue;
    const r = el.getBoundingClientRect();
    const c = container.getBoundingClientRect();
    if (r.right > c.right + 1 || r.left < c.left - 1) bad.push((el.className || el.tagName) + ': ' + el.textContent.slice(0, 40));
  }
  const words = document.body.innerText.match(/\\b(NaN|null|undefined)\\b/g) ?? [];
  return { bad, words };
})()`;
