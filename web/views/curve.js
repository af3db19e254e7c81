// The error curve: relative error against the number of generators, drawn
// as SVG with axes, values on hover, a linear or log scale, and points to
// click (or focus and press Enter) to choose how many generators to use.

import { number, percent } from '../format.js';

const SVG = 'http://www.w3.org/2000/svg';
const MARGIN = { left: 46, right: 10, top: 10, bottom: 30 };

function element(name, attributes, parent) {
  const node = document.createElementNS(SVG, name);
  for (const [key, value] of Object.entries(attributes)) node.setAttribute(key, String(value));
  parent?.append(node);
  return node;
}

// "Nice" tick values covering [low, high] (steps of 1, 2 or 5 times a power of ten).
function linearTicks(low, high, count = 5) {
  const span = high - low || 1;
  const raw = span / count;
  const power = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * power).find((s) => s >= raw);
  const ticks = [];
  // From the first tick at or below `low` to the first at or above `high`.
  for (let t = Math.floor(low / step) * step; ; t += step) {
    ticks.push(Number(t.toPrecision(12)));
    if (t >= high - step * 1e-9) break;
  }
  return ticks;
}

export function createCurve({ onChoose }) {
  const svg = document.getElementById('curve');
  const hover = document.getElementById('curve-hover');
  const tableBody = document.querySelector('#curve-table tbody');
  const linear = document.getElementById('scale-linear');
  const log = document.getElementById('scale-log');
  let scale = 'linear';
  let last = null;

  const setScale = (next) => {
    scale = next;
    linear.setAttribute('aria-pressed', String(next === 'linear'));
    log.setAttribute('aria-pressed', String(next === 'log'));
    if (last) draw(last.curve, last.chosen);
  };
  linear.addEventListener('click', () => setScale('linear'));
  log.addEventListener('click', () => setScale('log'));
  new ResizeObserver(() => last && draw(last.curve, last.chosen)).observe(svg);

  const describe = (p) => `${p.generators} generator${p.generators === 1 ? '' : 's'}: relative error ${percent(p.relative_error)} (error ${number(p.error)})`;

  function draw(curve, chosen) {
    svg.replaceChildren();
    const width = svg.clientWidth || 300;
    const height = svg.clientHeight || 200;
    svg.setAttribute('viewBox', `0 0 ${width} ${height}`);
    const plotW = width - MARGIN.left - MARGIN.right;
    const plotH = height - MARGIN.top - MARGIN.bottom;
    const xs = curve.map((p) => p.generators);
    const xMin = Math.min(...xs);
    const xMax = Math.max(...xs);
    const x = (g) => MARGIN.left + (xMax === xMin ? plotW / 2 : ((g - xMin) / (xMax - xMin)) * plotW);
    const values = curve.map((p) => p.relative_error * 100);
    let y;
    let yTicks;
    let tickText;
    if (scale === 'log') {
      const positive = values.filter((v) => v > 0);
      const floor = positive.length ? Math.min(...positive) : 1e-6;
      const lo = Math.floor(Math.log10(floor));
      const hi = Math.max(lo + 1, Math.ceil(Math.log10(Math.max(...values, floor))));
      y = (v) => MARGIN.top + plotH - ((Math.log10(Math.max(v, 10 ** lo)) - lo) / (hi - lo)) * plotH;
      yTicks = [];
      for (let e = lo; e <= hi; e++) yTicks.push(10 ** e);
      tickText = (t) => `${Number(t.toPrecision(1))}`;
    } else {
      const hi = Math.max(...values) || 1;
      yTicks = linearTicks(0, hi);
      const top = yTicks[yTicks.length - 1];
      y = (v) => MARGIN.top + plotH - (v / top) * plotH;
      tickText = (t) => `${t}`;
    }
    for (const t of yTicks) {
      element('line', { class: 'grid', x1: MARGIN.left, x2: MARGIN.left + plotW, y1: y(t), y2: y(t) }, svg);
      const label = element('text', { class: 'tick', x: MARGIN.left - 4, y: y(t) + 3, 'text-anchor': 'end' }, svg);
      label.textContent = tickText(t);
    }
    const step = Math.max(1, Math.ceil((xMax - xMin + 1) / 10));
    for (let g = xMin; g <= xMax; g += step) {
      const label = element('text', { class: 'tick', x: x(g), y: MARGIN.top + plotH + 13, 'text-anchor': 'middle' }, svg);
      label.textContent = String(g);
    }
    element('line', { class: 'axis', x1: MARGIN.left, x2: MARGIN.left, y1: MARGIN.top, y2: MARGIN.top + plotH }, svg);
    element('line', { class: 'axis', x1: MARGIN.left, x2: MARGIN.left + plotW, y1: MARGIN.top + plotH, y2: MARGIN.top + plotH }, svg);
    const xTitle = element('text', { class: 'axis-title', x: MARGIN.left + plotW / 2, y: height - 3, 'text-anchor': 'middle' }, svg);
    xTitle.textContent = 'generators L';
    const yTitle = element('text', { class: 'axis-title', x: 10, y: MARGIN.top + plotH / 2, 'text-anchor': 'middle', transform: `rotate(-90 10 ${MARGIN.top + plotH / 2})` }, svg);
    yTitle.textContent = `relative error, %${scale === 'log' ? ' (log)' : ''}`;
    element('polyline', { class: 'line', points: curve.map((p, i) => `${x(p.generators)},${y(values[i])}`).join(' ') }, svg);
    curve.forEach((p, i) => {
      const point = element('circle', {
        class: `point${p.generators === chosen ? ' chosen' : ''}`,
        cx: x(p.generators), cy: y(values[i]), r: p.generators === chosen ? 6 : 4.5,
        tabindex: 0, role: 'button', 'aria-label': `Use ${describe(p)}`,
        'data-generators': p.generators,
      }, svg);
      const show = () => { hover.textContent = describe(p); };
      point.addEventListener('mouseenter', show);
      point.addEventListener('focus', show);
      point.addEventListener('click', () => onChoose(p.generators));
      point.addEventListener('keydown', (event) => {
        if (event.key === 'Enter' || event.key === ' ') {
          event.preventDefault();
          onChoose(p.generators);
        }
      });
    });
  }

  return {
    // curve: report.error_curve; chosen: the generator count in use.
    render(curve, chosen) {
      svg.toggleAttribute('hidden', !curve?.length);
      if (!curve?.length) {
        last = null;
        svg.replaceChildren();
        tableBody.replaceChildren();
        hover.textContent = 'Fit the stack to draw the curve.';
        return;
      }
      if (last?.curve !== curve) hover.textContent = 'Point at the curve to read values; choose a point to use that many generators.';
      last = { curve, chosen };
      draw(curve, chosen);
      tableBody.replaceChildren(...curve.map((p) => {
        const row = document.createElement('tr');
        row.dataset.generators = String(p.generators);
        row.dataset.error = String(p.error);
        row.dataset.relativeError = String(p.relative_error);
        for (const [text, cls] of [[String(p.generators), ''], [number(p.error), 'num'], [percent(p.relative_error), 'num']]) {
          const cell = document.createElement('td');
          cell.textContent = text;
          if (cls) cell.className = cls;
          row.append(cell);
        }
        return row;
      }));
    },
  };
}
