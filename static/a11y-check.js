// Accessibility checks of the page shown, run by the browser suite (tests/browser/support.rs)
// through WebDriver's execute_script on every page it visits. Never served: the server
// routes only static/massline.css. Returns a list of sentences, one per violation.
//
// What it checks (WCAG 2.2 level AA where a criterion applies):
// - `lang` on <html> (3.1.1);
// - landmarks: exactly one <main>; every <nav> labelled (1.3.1, 2.4.1);
// - every form field labelled: <label>, aria-label or aria-labelledby (1.3.1, 4.1.2);
// - images with alt text; SVG charts with an accessible name, unless hidden (1.1.1);
// - buttons and links with a name (2.4.4, 4.1.2);
// - text contrast of every visible text node, from computed colours composited over the
//   backgrounds behind it and the opacity of its ancestors: 4.5:1, 3:1 for large text
//   (24 px, or 18.66 px bold) (1.4.3). Text inside SVG (the charts) is drawn with `fill`
//   and not measured here; disabled controls are exempt, as WCAG allows;
// - the focus ring of the focused element, if any: drawn (an outline of at least 2 px) with
//   3:1 against the background around it (2.4.7, 1.4.11).
const problems = [];
const short = (el) => el.outerHTML.replace(/\s+/g, ' ').slice(0, 100);

if (!document.documentElement.getAttribute('lang')) problems.push('<html> has no lang attribute');

const mains = document.querySelectorAll('main, [role="main"]');
if (mains.length !== 1) problems.push('the page has ' + mains.length + ' main landmarks, not one');
for (const nav of document.querySelectorAll('nav, [role="navigation"]')) {
  if (!(nav.getAttribute('aria-label') || '').trim() && !nav.getAttribute('aria-labelledby')) {
    problems.push('navigation without a label: ' + short(nav));
  }
}

const textOf = (ids) => ids.split(/\s+/).filter(Boolean)
  .map((id) => { const t = document.getElementById(id); return t ? t.textContent : ''; }).join(' ');

// The accessible name, as far as these pages need it.
function nameOf(el) {
  let name = (el.getAttribute('aria-label') || '') + ' ' + textOf(el.getAttribute('aria-labelledby') || '');
  if (el.labels) for (const l of el.labels) name += ' ' + l.textContent;
  if (!name.trim()) {
    for (const n of el.querySelectorAll('*')) if (n.tagName === 'IMG') name += ' ' + (n.getAttribute('alt') || '');
    name += ' ' + el.textContent;
    if (el.tagName === 'INPUT' && ['submit', 'button', 'reset'].includes(el.type)) name += ' ' + el.value;
    name += ' ' + (el.getAttribute('title') || '');
  }
  return name.replace(/\s+/g, ' ').trim();
}

for (const el of document.querySelectorAll('input, select, textarea')) {
  if (el.type === 'hidden') continue;
  const labelled = (el.labels && [...el.labels].some((l) => l.textContent.trim()))
    || (el.getAttribute('aria-label') || '').trim() || textOf(el.getAttribute('aria-labelledby') || '').trim();
  if (!labelled) problems.push('form field without a label: ' + short(el));
}
for (const img of document.querySelectorAll('img')) {
  if (!img.hasAttribute('alt')) problems.push('image without alt text: ' + short(img));
}
for (const svg of document.querySelectorAll('svg')) {
  if (svg.parentElement && svg.parentElement.closest('svg')) continue;
  if (svg.closest('[aria-hidden="true"]')) continue;
  const titled = svg.querySelector(':scope > title');
  if (!nameOf(svg.cloneNode(false)) && !(titled && titled.textContent.trim())
      && !(svg.getAttribute('aria-label') || '').trim()) {
    problems.push('SVG without an accessible name: ' + short(svg));
  }
}
for (const el of document.querySelectorAll('button, a[href], [role="button"], input[type="submit"], input[type="button"]')) {
  if (el.closest('[aria-hidden="true"]')) continue;
  if (!nameOf(el)) problems.push((el.tagName === 'A' ? 'link' : 'button') + ' without a name: ' + short(el));
}

// Colours: "rgb(r, g, b)" or "rgba(r, g, b, a)" to [r, g, b, a].
function rgba(text) {
  const m = text.match(/rgba?\(([^)]+)\)/);
  if (!m) return null;
  const p = m[1].split(/[\s,/]+/).filter(Boolean).map(Number);
  return [p[0], p[1], p[2], p.length > 3 ? p[3] : 1];
}
const over = (top, under) => {
  const a = top[3];
  return [0, 1, 2].map((i) => top[i] * a + under[i] * (1 - a)).concat([1]);
};
const channel = (c) => { c /= 255; return c <= 0.03928 ? c / 12.92 : ((c + 0.055) / 1.055) ** 2.4; };
const luminance = (c) => 0.2126 * channel(c[0]) + 0.7152 * channel(c[1]) + 0.0722 * channel(c[2]);
const ratio = (a, b) => {
  const [x, y] = [luminance(a), luminance(b)].sort((p, q) => q - p);
  return (x + 0.05) / (y + 0.05);
};
// The colour behind an element: its own and its ancestors' backgrounds composited over white;
// null when an image is behind it (not measurable from computed styles).
function backgroundOf(el) {
  const layers = [];
  for (let n = el; n && n.nodeType === 1; n = n.parentElement) {
    const s = getComputedStyle(n);
    if (s.backgroundImage && s.backgroundImage !== 'none') return null;
    const c = rgba(s.backgroundColor);
    if (c && c[3] > 0) { layers.push(c); if (c[3] >= 1) break; }
  }
  let colour = [255, 255, 255, 1];
  for (const c of layers.reverse()) colour = over(c, colour);
  return colour;
}
function opacityOf(el) {
  let o = 1;
  for (let n = el; n && n.nodeType === 1; n = n.parentElement) o *= Number(getComputedStyle(n).opacity);
  return o;
}
const seen = new Set();
const walker = document.createTreeWalker(document.body, NodeFilter.SHOW_TEXT);
for (let t = walker.nextNode(); t; t = walker.nextNode()) {
  if (!t.textContent.trim()) continue;
  const el = t.parentElement;
  if (!el || seen.has(el) || el.closest('svg, script, style, template, noscript')) continue;
  seen.add(el);
  if (el.closest('button:disabled, input:disabled, select:disabled, textarea:disabled, option')) continue;
  const s = getComputedStyle(el);
  if (s.visibility === 'hidden' || s.display === 'none') continue;
  const range = document.createRange();
  range.selectNodeContents(t);
  const box = range.getBoundingClientRect();
  // Off-screen (the skip link until focused) or clipped to a pixel (visually hidden).
  if (box.width <= 1 || box.height <= 1 || box.right <= 0 || box.bottom <= 0) continue;
  const back = backgroundOf(el);
  const fore = rgba(s.color);
  if (!back || !fore) continue;
  const ink = over([fore[0], fore[1], fore[2], fore[3] * opacityOf(el)], back);
  const size = parseFloat(s.fontSize);
  const large = size >= 24 || (size >= 18.66 && Number(s.fontWeight) >= 700);
  const need = large ? 3 : 4.5;
  const got = ratio(ink, back);
  if (got < need) {
    problems.push('text contrast ' + got.toFixed(2) + ':1 (needs ' + need + ':1), '
      + s.color + ' on rgb(' + back.slice(0, 3).map(Math.round).join(', ') + '): “'
      + t.textContent.trim().slice(0, 40) + '” in ' + short(el));
  }
}
const focused = document.activeElement;
if (focused && focused !== document.body && focused.matches(':focus-visible')) {
  const s = getComputedStyle(focused);
  const ring = rgba(s.outlineColor);
  const around = backgroundOf(focused.parentElement || document.body);
  if (s.outlineStyle === 'none' || parseFloat(s.outlineWidth) < 2 || !ring) {
    problems.push('the focused element shows no focus ring: ' + short(focused));
  } else if (around) {
    const got = ratio(over(ring, around), around);
    if (got < 3) {
      problems.push('focus ring contrast ' + got.toFixed(2) + ':1 (needs 3:1), ' + s.outlineColor
        + ' on rgb(' + around.slice(0, 3).map(Math.round).join(', ') + '): ' + short(focused));
    }
  }
}
return problems;
