// Card 4, Results: error per image, the band limit's terms, and the model
// (where it came from, Open model, Apply model to the stack).

import { number, percent, size } from '../format.js';

export function createResultsCard({ onSelect, onOpenModel, onApply }) {
  const empty = document.getElementById('results-empty');
  const table = document.getElementById('image-errors');
  const caption = document.getElementById('image-errors-caption');
  const body = table.querySelector('tbody');
  const band = document.getElementById('band-info');
  const modelInfo = document.getElementById('model-info');
  const apply = document.getElementById('apply-model');
  const open = document.getElementById('open-model');
  const input = document.getElementById('model-input');
  const status = document.getElementById('model-status');
  const summary = document.getElementById('results-summary');
  let shownRows = null;

  open.addEventListener('click', () => input.click());
  input.addEventListener('change', () => {
    if (input.files.length) onOpenModel(input.files[0]);
    input.value = '';
  });
  apply.addEventListener('click', onApply);

  return {
    render(state) {
      const errors = state.errors;
      empty.hidden = Boolean(errors);
      table.hidden = !errors;
      if (errors && errors.rows !== shownRows) {
        shownRows = errors.rows;
        caption.textContent = errors.caption;
        const worst = Math.max(...errors.rows.map((r) => r.relative_error));
        body.replaceChildren(...errors.rows.map((r, i) => {
          const row = document.createElement('tr');
          row.dataset.file = r.file;
          row.dataset.energy = String(r.energy);
          row.dataset.error = String(r.error);
          row.dataset.relativeError = String(r.relative_error);
          if (errors.rows.length > 1 && r.relative_error === worst) row.classList.add('worst');
          const file = document.createElement('td');
          file.className = 'file';
          const button = document.createElement('button');
          button.type = 'button';
          button.textContent = r.file;
          button.title = `Show ${r.file}`;
          button.addEventListener('click', () => onSelect(i));
          file.append(button);
          row.append(file);
          for (const text of [number(r.energy), number(r.error), percent(r.relative_error)]) {
            const cell = document.createElement('td');
            cell.className = 'num';
            cell.textContent = text;
            row.append(cell);
          }
          return row;
        }));
      }
      const bandReport = state.fit?.report.band;
      band.hidden = !bandReport;
      if (bandReport) {
        const total = state.fit.report.total_energy;
        band.textContent = `Band limit: ${bandReport.frequencies} frequencies kept; energy outside the band ${number(bandReport.outside_energy)} (${percent(total ? bandReport.outside_energy / total : 0)} of the stack).`;
      }
      const model = state.model;
      if (model) {
        const s = model.info.settings;
        const from = model.source === 'fit' ? 'From this fit' : `From the file ${model.source}`;
        const count = `${model.info.generators} generator${model.info.generators === 1 ? '' : 's'}`;
        const grid = model.info.grid;
        modelInfo.textContent = grid
          ? `${from}: ${s.group} on the lattice grid (a lattice-grid model) · ${grid.cells[0]} x ${grid.cells[1]} cells of ${grid.samples[0]} x ${grid.samples[1]} samples · ${count} · grid ${size(model.info.height, model.info.width)} samples.`
          : `${from}: ${s.group} · cell ${s.cell_rows} x ${s.cell_cols} · ${count} · images ${size(model.info.height, model.info.width)}.`;
      } else {
        modelInfo.textContent = 'No model yet: fit the stack or open a saved model.';
      }
      apply.disabled = !model || !state.images.length || state.busy !== null;
      open.disabled = state.busy !== null;
      status.textContent = state.modelStatus ?? '';
      status.className = state.modelStatusIsProblem ? 'status problem' : 'status';
      if (errors) {
        const worstRow = errors.rows.reduce((a, b) => (b.relative_error > a.relative_error ? b : a), errors.rows[0]);
        summary.textContent = worstRow ? `worst ${percent(worstRow.relative_error)} (${worstRow.file})` : '';
      } else {
        summary.textContent = '';
      }
    },
  };
}
