// Card 1, Stack: add images (drop or picker), the example stack, tiles, and
// the list of files with their status or the problem beside each.

import { size } from '../format.js';

export function createStackCard({ onFiles, onExample, onRemove, onClear }) {
  const dropzone = document.getElementById('dropzone');
  const input = document.getElementById('file-input');
  const list = document.getElementById('file-list');
  const summary = document.getElementById('stack-summary');
  const clear = document.getElementById('clear-stack');
  const note = document.getElementById('example-note');
  const tileOn = document.getElementById('tile-on');
  const tileRows = document.getElementById('tile-rows');
  const tileCols = document.getElementById('tile-cols');

  document.getElementById('add-images').addEventListener('click', () => input.click());
  input.addEventListener('change', () => {
    if (input.files.length) onFiles([...input.files]);
    input.value = '';
  });
  document.getElementById('use-example').addEventListener('click', onExample);
  clear.addEventListener('click', onClear);
  for (const name of ['dragenter', 'dragover']) {
    dropzone.addEventListener(name, (event) => {
      event.preventDefault();
      dropzone.classList.add('dragging');
    });
  }
  dropzone.addEventListener('dragleave', () => dropzone.classList.remove('dragging'));
  dropzone.addEventListener('drop', (event) => {
    event.preventDefault();
    dropzone.classList.remove('dragging');
    const files = [...(event.dataTransfer?.files ?? [])];
    if (files.length) onFiles(files);
  });
  // Dropping anywhere else must not make the browser open the file.
  window.addEventListener('dragover', (event) => event.preventDefault());
  window.addEventListener('drop', (event) => event.preventDefault());

  return {
    // The tile size for images added next, or null.
    tile() {
      if (!tileOn.checked) return null;
      const rows = Number(tileRows.value);
      const cols = Number(tileCols.value);
      if (!Number.isInteger(rows) || !Number.isInteger(cols) || rows < 1 || cols < 1) {
        throw new Error('tile size must be two whole numbers of pixels, at least 1');
      }
      return { rows, cols };
    },
    render(state) {
      const n = state.images.length;
      const first = state.images[0];
      summary.textContent = n ? `${n} image${n === 1 ? '' : 's'} · ${size(first.height, first.width)}` : 'no images yet';
      clear.hidden = state.files.length === 0;
      note.hidden = !state.example;
      note.textContent = state.example ? `${state.example.name}: ${state.example.description}` : '';
      list.replaceChildren(...state.files.map((entry) => {
        const item = document.createElement('li');
        item.className = entry.status;
        const name = document.createElement('span');
        name.className = 'file-name';
        name.textContent = entry.name;
        const detail = document.createElement('span');
        detail.className = 'file-detail';
        if (entry.status === 'reading') detail.textContent = 'reading…';
        else if (entry.status === 'failed') detail.textContent = entry.message;
        else {
          const img = entry.images[0];
          detail.textContent = `${entry.images.length} image${entry.images.length === 1 ? '' : 's'} · ${size(img.height, img.width)}`;
        }
        if (entry.status === 'failed') detail.setAttribute('role', 'alert');
        const button = document.createElement('button');
        button.type = 'button';
        button.textContent = entry.status === 'failed' ? 'Dismiss' : 'Remove';
        button.setAttribute('aria-label', `${button.textContent} ${entry.name}`);
        button.disabled = entry.status === 'reading' || state.busy !== null;
        button.addEventListener('click', () => onRemove(entry));
        item.append(name, detail, button);
        return item;
      }));
    },
  };
}
