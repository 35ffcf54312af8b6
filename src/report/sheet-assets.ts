/**
 * The review sheet's inline stylesheet and script. Plain CSS and plain browser JavaScript (no
 * libraries, no network), kept as strings so the page is one file.
 */

/** The sheet's look: quiet paper-like background, dark text, one teal accent, system fonts. */
export const SHEET_STYLE = `
:root { --ink: #1f2328; --muted: #5b616b; --line: #d8dadd; --paper: #f6f5f2; --card: #ffffff;
  --accent: #2c7a7b; --warn: #a4431c; font-size: 15px; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--paper); color: var(--ink);
  font-family: system-ui, -apple-system, "Segoe UI", "DejaVu Sans", sans-serif; line-height: 1.4; }
.top { position: sticky; top: 0; z-index: 5; background: var(--paper); border-bottom: 1px solid var(--line);
  padding: 14px 24px 10px; }
h1 { margin: 0 0 2px; font-size: 1.35rem; font-weight: 600; }
h1 .folder { font-weight: 400; color: var(--muted); font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: 1rem; margin-left: 6px; }
.note { margin: 0 0 8px; color: var(--muted); font-size: .9rem; }
.facts { display: flex; flex-wrap: wrap; gap: 4px 22px; margin: 0 0 10px; font-size: .88rem; }
.facts div { display: flex; gap: 6px; } .facts dt { color: var(--muted); } .facts dd { margin: 0; }
.controls { display: flex; gap: 18px; align-items: center; font-size: .92rem; }
select { font: inherit; padding: 3px 6px; border: 1px solid var(--line); border-radius: 4px; background: var(--card); }
#count { color: var(--muted); }
main { padding: 16px 24px 40px; display: grid; gap: 16px; }
.photo { background: var(--card); border: 1px solid var(--line); border-radius: 6px; padding: 12px 16px 14px; }
.photo[hidden] { display: none; }
.photo header { display: flex; align-items: baseline; justify-content: space-between; gap: 12px; margin-bottom: 10px; }
h2 { margin: 0; font-size: 1.02rem; font-weight: 600; font-family: ui-monospace, "DejaVu Sans Mono", monospace; word-break: break-all; }
.badge { font-size: .85rem; color: var(--muted); white-space: nowrap; display: inline-flex; align-items: center; gap: 8px; }
.badge b { color: var(--ink); }
.badge.bad { color: #fff; background: var(--warn); padding: 2px 8px; border-radius: 3px; }
.track { display: inline-block; width: 90px; height: 8px; background: #e9e6df; border-radius: 4px; overflow: hidden; }
.fill { display: block; height: 100%; background: var(--accent); }
.body { display: grid; grid-template-columns: minmax(280px, 1.25fr) minmax(300px, 1fr); gap: 18px; align-items: start; }
.viewer { display: flex; justify-content: center; background: #eeece7; border-radius: 4px; padding: 6px; }
.compare { position: relative; display: inline-block; max-width: 100%; line-height: 0; user-select: none; }
.compare img.after { display: block; max-width: 100%; max-height: 460px; width: auto; height: auto; }
.before-clip { position: absolute; inset: 0; clip-path: inset(0 50% 0 0); }
.before-clip img { display: block; width: 100%; height: 100%; }
.divider { position: absolute; top: 0; bottom: 0; left: 50%; width: 2px; margin-left: -1px; background: #fff;
  box-shadow: 0 0 0 1px rgba(0,0,0,.35); pointer-events: none; }
.compare input[type=range] { position: absolute; inset: 0; width: 100%; height: 100%; margin: 0; opacity: 0; cursor: ew-resize; }
.tag { position: absolute; top: 8px; line-height: 1; font-size: .75rem; color: #fff; background: rgba(20,22,26,.62);
  padding: 3px 6px; border-radius: 3px; pointer-events: none; }
.tag.left { left: 8px; } .tag.right { right: 8px; }
.trio { display: grid; grid-template-columns: repeat(3, 1fr); gap: 8px; }
.trio.four { grid-template-columns: repeat(4, 1fr); }
.viewers { display: grid; gap: 8px; align-content: start; }
figure { margin: 0; }
.thumb { display: block; width: 100%; height: 110px; object-fit: contain; background: #eeece7; border-radius: 3px; }
figcaption { font-size: .78rem; color: var(--muted); margin-top: 3px; }
.missing { height: 110px; display: flex; align-items: center; justify-content: center; font-size: .8rem; color: var(--muted);
  background: #eeece7; border-radius: 3px; }
.chart { margin-top: 12px; display: flex; gap: 18px; align-items: flex-end; flex-wrap: wrap; }
.chart .label { font-size: .78rem; color: var(--muted); margin-bottom: 2px; }
.keyfacts { margin: 0; font-size: .82rem; display: grid; grid-template-columns: auto 1fr; gap: 1px 10px; }
.keyfacts dt { color: var(--muted); } .keyfacts dd { margin: 0; }
.hist text { font-size: 9px; fill: var(--muted); font-family: system-ui, sans-serif; }
details { margin-top: 10px; font-size: .85rem; }
summary { cursor: pointer; color: var(--accent); }
.prov { border-collapse: collapse; margin-top: 6px; width: 100%; }
.prov th { text-align: left; font-weight: 500; color: var(--muted); padding: 2px 12px 2px 0; vertical-align: top; white-space: nowrap; }
.prov td { padding: 2px 0; word-break: break-all; font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: .8rem; }
.failed { border-left: 4px solid var(--warn); }
.message { margin: 0; font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: .88rem; }
.hint { margin: 6px 0 0; color: var(--muted); }
.empty { text-align: center; color: var(--muted); }
@media (max-width: 820px) { .body { grid-template-columns: 1fr; } .top { position: static; } }
`;

/** Sorting, filtering and the before/after dividers. */
export const SHEET_SCRIPT = `
(function () {
  var list = document.getElementById('photos');
  var sort = document.getElementById('sort');
  var show = document.getElementById('show');
  var count = document.getElementById('count');
  var empty = document.getElementById('empty');
  var cards = Array.prototype.slice.call(list.querySelectorAll('.photo'));
  function conf(card, missing) {
    var v = card.getAttribute('data-confidence');
    return v === '' ? missing : parseFloat(v);
  }
  function byName(x, y) {
    var a = x.getAttribute('data-name'), b = y.getAttribute('data-name');
    return a < b ? -1 : a > b ? 1 : 0;
  }
  var orders = {
    'confidence-asc': function (x, y) { return conf(x, 2) - conf(y, 2) || byName(x, y); },
    'confidence-desc': function (x, y) { return conf(y, -1) - conf(x, -1) || byName(x, y); },
    'name': byName,
    'failed-first': function (x, y) {
      var fx = x.getAttribute('data-status') === 'failed' ? 0 : 1, fy = y.getAttribute('data-status') === 'failed' ? 0 : 1;
      return fx - fy || conf(x, 2) - conf(y, 2) || byName(x, y);
    }
  };
  function apply() {
    var order = orders[sort.value] || orders['confidence-asc'];
    cards.slice().sort(order).forEach(function (card) { list.appendChild(card); });
    var shown = 0;
    cards.forEach(function (card) {
      var status = card.getAttribute('data-status');
      var visible = show.value === 'all' || show.value === status;
      card.hidden = !visible;
      if (visible) shown++;
    });
    count.textContent = 'showing ' + shown + ' of ' + cards.length;
    empty.hidden = shown !== 0;
  }
  sort.addEventListener('change', apply);
  show.addEventListener('change', apply);
  Array.prototype.forEach.call(document.querySelectorAll('[data-compare]'), function (box) {
    var range = box.querySelector('input');
    var clip = box.querySelector('.before-clip');
    var divider = box.querySelector('.divider');
    function move() {
      clip.style.clipPath = 'inset(0 ' + (100 - range.value) + '% 0 0)';
      divider.style.left = range.value + '%';
    }
    range.addEventListener('input', move);
    move();
  });
  apply();
})();
`;
