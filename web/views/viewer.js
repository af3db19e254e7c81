// The centre: original · fitted · residual with one shared zoom and pan, the
// lattice drawn on top if asked (the cell on the pixel grid, or a measured
// lattice: its two vectors from the grid origin and the lines through it), a read-out of the values under the
// pointer, and the strip of thumbnails of the stack.

import { number, size } from '../format.js';

const KINDS = ['original', 'fitted', 'residual'];
const ZOOM_STEP = 1.5;

// The measured lattice to draw: after a fit on it, the fit's grid (its cell,
// origin at the symmetry centre, and number of cells); else the measured
// vectors from the survey's best centre, or from the image centre.
function measuredLattice(state) {
  const fit = state.latticeFit;
  if (fit && state.model?.source === 'fit') return { a1: fit.grid.cell[0], a2: fit.grid.cell[1], origin: fit.grid.origin, cells: fit.grid.cells };
  const m = state.lattice;
  const image = state.images[0];
  if (!m || !image) return null;
  const origin = state.survey?.groups[0]?.centre ?? [image.height / 2, image.width / 2];
  return { a1: m.a1, a2: m.a2, origin };
}

export function createViewer({ onSelect }) {
  const panes = KINDS.map((kind) => ({ kind, canvas: document.getElementById(`pane-${kind}`), picture: null, bitmap: null }));
  const readout = document.getElementById('readout');
  const problem = document.getElementById('viewer-problem');
  const zoomLevel = document.getElementById('zoom-level');
  const showCell = document.getElementById('show-cell');
  const thumbs = document.getElementById('thumbs');
  const name = document.getElementById('image-name');
  // Zoom in device pixels per image pixel (null: whole image in the pane) and the image point at the pane centre.
  const view = { scale: null, cx: 0, cy: 0 };
  let imageSize = null;
  let cell = null;
  let lattice = null; // { a1, a2, origin, cells? } in pixels, (row, column)
  let thumbKey = '';
  let selected = 0;
  let hasModel = false;
  document.getElementById('prev-image').addEventListener('click', () => onSelect(selected - 1));
  document.getElementById('next-image').addEventListener('click', () => onSelect(selected + 1));

  const bitmapOf = (picture) => {
    const canvas = document.createElement('canvas');
    canvas.width = picture.width;
    canvas.height = picture.height;
    canvas.getContext('2d').putImageData(new ImageData(picture.rgba, picture.width, picture.height), 0, 0);
    return canvas;
  };

  const fitScale = (canvas) => (imageSize ? Math.min(canvas.width / imageSize.width, canvas.height / imageSize.height) : 1);
  const scaleFor = (canvas) => view.scale ?? fitScale(canvas);

  function draw() {
    const cellColour = getComputedStyle(document.documentElement).getPropertyValue('--cell').trim() || '#f59e0b';
    for (const pane of panes) {
      const { canvas } = pane;
      const ratio = window.devicePixelRatio || 1;
      const w = Math.max(1, Math.round(canvas.clientWidth * ratio));
      const h = Math.max(1, Math.round(canvas.clientHeight * ratio));
      if (canvas.width !== w || canvas.height !== h) {
        canvas.width = w;
        canvas.height = h;
      }
      const ctx = canvas.getContext('2d');
      ctx.setTransform(1, 0, 0, 1, 0, 0);
      ctx.clearRect(0, 0, w, h);
      if (!pane.bitmap || !imageSize) continue;
      const s = scaleFor(canvas);
      const cx = view.scale === null ? imageSize.width / 2 : view.cx;
      const cy = view.scale === null ? imageSize.height / 2 : view.cy;
      ctx.setTransform(s, 0, 0, s, w / 2 - cx * s, h / 2 - cy * s);
      ctx.imageSmoothingEnabled = s < 1;
      ctx.drawImage(pane.bitmap, 0, 0);
      if (showCell.checked && lattice) drawLattice(ctx, s, cellColour);
      else if (showCell.checked && cell) drawCell(ctx, s, cellColour);
    }
    zoomLevel.textContent = view.scale === null ? 'whole' : `${Math.round(view.scale * 100 / (window.devicePixelRatio || 1))} %`;
  }

  // Lattice lines every cell height / width, through the origin.
  function drawCell(ctx, s, colour) {
    const { rows, cols, origin } = cell;
    const { width, height } = imageSize;
    ctx.lineWidth = Math.max(1 / s, 1.5 / s);
    ctx.strokeStyle = colour;
    ctx.beginPath();
    for (let y = origin[0] % rows; y <= height; y += rows) {
      ctx.moveTo(0, y);
      ctx.lineTo(width, y);
    }
    for (let x = origin[1] % cols; x <= width; x += cols) {
      ctx.moveTo(x, 0);
      ctx.lineTo(x, height);
    }
    ctx.stroke();
  }

  // A measured lattice: the cells of the fit's grid (the resampled area) or
  // a block of cells around the origin, clipped to the image, and the two
  // vectors drawn thicker from the origin. Pixel (r, c) has its centre at
  // (c + 0.5, r + 0.5).
  function drawLattice(ctx, s, colour) {
    const { a1, a2, origin, cells } = lattice;
    const { width, height } = imageSize;
    const at = (u, v) => [origin[1] + u * a1[1] + v * a2[1] + 0.5, origin[0] + u * a1[0] + v * a2[0] + 0.5];
    const [u0, u1, v0, v1] = cells ? [0, cells[0], 0, cells[1]] : [-2, 3, -2, 3];
    ctx.save();
    ctx.beginPath();
    ctx.rect(0, 0, width, height);
    ctx.clip();
    ctx.strokeStyle = colour;
    ctx.globalAlpha = 0.8;
    ctx.lineWidth = 1 / s;
    ctx.beginPath();
    for (let u = u0; u <= u1; u++) {
      ctx.moveTo(...at(u, v0));
      ctx.lineTo(...at(u, v1));
    }
    for (let v = v0; v <= v1; v++) {
      ctx.moveTo(...at(u0, v));
      ctx.lineTo(...at(u1, v));
    }
    ctx.stroke();
    ctx.globalAlpha = 1;
    ctx.lineWidth = 3 / s;
    ctx.beginPath();
    for (const [u, v] of [[1, 0], [0, 1]]) {
      ctx.moveTo(...at(0, 0));
      ctx.lineTo(...at(u, v));
    }
    ctx.stroke();
    ctx.beginPath();
    ctx.arc(...at(0, 0), 3 / s, 0, 2 * Math.PI);
    ctx.fillStyle = colour;
    ctx.fill();
    ctx.restore();
  }

  function centre() {
    if (view.scale === null && imageSize) return { cx: imageSize.width / 2, cy: imageSize.height / 2 };
    return { cx: view.cx, cy: view.cy };
  }

  // Zoom by `factor` keeping the image point under (px, py) (device pixels in `canvas`) fixed.
  function zoom(factor, canvas = panes[0].canvas, px = canvas.width / 2, py = canvas.height / 2) {
    if (!imageSize) return;
    const s = scaleFor(canvas);
    const { cx, cy } = centre();
    const ix = cx + (px - canvas.width / 2) / s;
    const iy = cy + (py - canvas.height / 2) / s;
    const next = Math.min(64, Math.max(fitScale(canvas) / 4, s * factor));
    view.scale = next;
    view.cx = ix - (px - canvas.width / 2) / next;
    view.cy = iy - (py - canvas.height / 2) / next;
    draw();
  }

  function pan(dx, dy, canvas) {
    if (!imageSize) return;
    const s = scaleFor(canvas);
    const { cx, cy } = centre();
    view.scale = s;
    view.cx = cx - dx / s;
    view.cy = cy - dy / s;
    draw();
  }

  function pixelAt(canvas, event) {
    const rect = canvas.getBoundingClientRect();
    const ratio = canvas.width / rect.width;
    const px = (event.clientX - rect.left) * ratio;
    const py = (event.clientY - rect.top) * ratio;
    const s = scaleFor(canvas);
    const { cx, cy } = centre();
    return { col: Math.floor(cx + (px - canvas.width / 2) / s), row: Math.floor(cy + (py - canvas.height / 2) / s), px, py };
  }

  function showReadout(row, col) {
    if (!imageSize || row < 0 || col < 0 || row >= imageSize.height || col >= imageSize.width) {
      readout.textContent = 'Point at an image to read its values.';
      return;
    }
    const at = row * imageSize.width + col;
    const parts = panes.filter((p) => p.picture?.values).map((p) => `${p.kind} ${number(p.picture.values[at])}`);
    readout.textContent = `row ${row}, column ${col} · ${parts.join(' · ')}`;
  }

  for (const pane of panes) {
    const { canvas } = pane;
    let drag = null;
    canvas.addEventListener('pointerdown', (event) => {
      drag = { x: event.clientX, y: event.clientY };
      canvas.setPointerCapture(event.pointerId);
      canvas.classList.add('dragging');
    });
    canvas.addEventListener('pointermove', (event) => {
      if (drag) {
        const ratio = canvas.width / canvas.getBoundingClientRect().width;
        pan((event.clientX - drag.x) * ratio, (event.clientY - drag.y) * ratio, canvas);
        drag = { x: event.clientX, y: event.clientY };
      }
      const { row, col } = pixelAt(canvas, event);
      showReadout(row, col);
    });
    const endDrag = () => {
      drag = null;
      canvas.classList.remove('dragging');
    };
    canvas.addEventListener('pointerup', endDrag);
    canvas.addEventListener('pointercancel', endDrag);
    canvas.addEventListener('pointerleave', () => showReadout(-1, -1));
    canvas.addEventListener('wheel', (event) => {
      event.preventDefault();
      const { px, py } = pixelAt(canvas, event);
      zoom(event.deltaY < 0 ? ZOOM_STEP : 1 / ZOOM_STEP, canvas, px, py);
    }, { passive: false });
    canvas.addEventListener('keydown', (event) => {
      const step = canvas.width / 10;
      const keys = {
        ArrowLeft: () => pan(step, 0, canvas),
        ArrowRight: () => pan(-step, 0, canvas),
        ArrowUp: () => pan(0, step, canvas),
        ArrowDown: () => pan(0, -step, canvas),
        '+': () => zoom(ZOOM_STEP, canvas),
        '=': () => zoom(ZOOM_STEP, canvas),
        '-': () => zoom(1 / ZOOM_STEP, canvas),
        '0': () => whole(),
      };
      if (keys[event.key]) {
        event.preventDefault();
        keys[event.key]();
      }
    });
  }

  function whole() {
    view.scale = null;
    draw();
  }

  document.getElementById('zoom-in').addEventListener('click', () => zoom(ZOOM_STEP));
  document.getElementById('zoom-out').addEventListener('click', () => zoom(1 / ZOOM_STEP));
  document.getElementById('zoom-fit').addEventListener('click', whole);
  showCell.addEventListener('change', draw);
  new ResizeObserver(draw).observe(document.querySelector('.panes'));

  function renderThumbnails(state) {
    const key = state.thumbnails.length + ':' + state.images.map((i) => i.label).join('|');
    if (key !== thumbKey) {
      thumbKey = key;
      thumbs.replaceChildren();
      state.thumbnails.forEach((picture, i) => {
        const button = document.createElement('button');
        button.type = 'button';
        button.dataset.index = String(i);
        button.title = state.images[i]?.label ?? '';
        button.setAttribute('aria-label', `Show image ${i + 1}: ${state.images[i]?.label ?? ''}`);
        const canvas = document.createElement('canvas');
        canvas.width = 56;
        canvas.height = 56;
        const ctx = canvas.getContext('2d');
        const scale = Math.min(56 / picture.width, 56 / picture.height);
        ctx.imageSmoothingEnabled = scale < 1;
        ctx.drawImage(bitmapOf(picture), (56 - picture.width * scale) / 2, (56 - picture.height * scale) / 2, picture.width * scale, picture.height * scale);
        const label = document.createElement('span');
        label.textContent = String(i + 1);
        button.append(canvas, label);
        button.addEventListener('click', () => onSelect(i));
        thumbs.append(button);
      });
    }
    for (const button of thumbs.children) {
      button.setAttribute('aria-current', String(Number(button.dataset.index) === state.selected));
    }
  }

  return {
    // pictures: { original, fitted, residual, problem } from the worker, or null.
    show(pictures) {
      for (const pane of panes) {
        pane.picture = pictures?.[pane.kind] ?? null;
        pane.bitmap = pane.picture ? bitmapOf(pane.picture) : null;
      }
      const first = pictures?.original;
      const next = first ? { width: first.width, height: first.height } : null;
      if (!next || !imageSize || next.width !== imageSize.width || next.height !== imageSize.height) view.scale = null;
      imageSize = next;
      problem.textContent = pictures?.problem
        ? `Fitted and residual not shown: ${pictures.problem}`
        : pictures ? '' : 'Add images or use the example stack to see them here.';
      problem.className = pictures?.problem && hasModel ? 'problem' : 'hint';
      draw();
    },
    render(state) {
      selected = state.selected;
      hasModel = Boolean(state.model);
      const image = state.images[state.selected];
      name.textContent = image ? `${state.selected + 1} / ${state.images.length} · ${image.label} · ${size(image.height, image.width)}` : 'no image';
      document.getElementById('prev-image').disabled = state.selected <= 0;
      document.getElementById('next-image').disabled = state.selected >= state.images.length - 1;
      const s = state.settings;
      cell = s.cell_rows > 0 && s.cell_cols > 0 ? { rows: s.cell_rows, cols: s.cell_cols, origin: s.origin } : null;
      lattice = s.lattice ? measuredLattice(state) : null;
      document.getElementById('fitted-count').textContent = state.model ? `(L = ${state.model.info.generators})` : '';
      renderThumbnails(state);
      draw();
    },
  };
}
