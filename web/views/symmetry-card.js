// Card 2, Symmetry: the plane group (groups that do not fit the cell and
// image size, or that the measured lattice does not allow, are disabled with
// a one-line reason) and the lattice: on the pixel grid (unit cell, origin,
// lattice coordinates), measured from the images, or typed as two vectors;
// for a measured lattice, Measure shows it and Survey ranks the groups.

import { number, percent } from '../format.js';

const whole = (input) => (input.value.trim() === '' ? null : Number(input.value));
const real = (input) => (input.value.trim() === '' ? NaN : Number(input.value));

const MODE_HINTS = {
  pixel: '',
  detect: 'The lattice is measured from the peaks of the images\' spectrum; the images are resampled onto it before fitting.',
  vectors: 'Give two lattice vectors in pixels; the images are resampled onto them before fitting.',
};

export function createSymmetryCard({ onChange, onMeasure, onSurvey, onChooseGroup }) {
  const group = document.getElementById('group');
  const reason = document.getElementById('group-reason');
  const problem = document.getElementById('settings-problem');
  const summary = document.getElementById('symmetry-summary');
  const inputs = {
    cellRows: document.getElementById('cell-rows'),
    cellCols: document.getElementById('cell-cols'),
    originRow: document.getElementById('origin-row'),
    originCol: document.getElementById('origin-col'),
    lattice: document.getElementById('lattice-coords'),
  };
  const mode = document.getElementById('lattice-mode');
  const modeHint = document.getElementById('lattice-mode-hint');
  const measuredBox = document.getElementById('measured-lattice');
  const pixelBox = document.getElementById('pixel-lattice');
  const vectorsBox = document.getElementById('lattice-vectors');
  const vectors = ['a1-row', 'a1-col', 'a2-row', 'a2-col'].map((id) => document.getElementById(id));
  const samples = document.getElementById('samples');
  const measure = document.getElementById('measure');
  const surveyButton = document.getElementById('survey');
  const info = document.getElementById('lattice-info');
  const latticeProblem = document.getElementById('lattice-problem');
  const surveyResult = document.getElementById('survey-result');
  const surveyBody = document.querySelector('#survey-table tbody');
  const surveyProgress = document.getElementById('survey-progress');
  const surveyBar = document.getElementById('survey-bar');
  const surveyText = document.getElementById('survey-progress-text');
  let groupsKey = '';
  let shownSurvey = null;
  group.addEventListener('change', onChange);
  for (const input of [...Object.values(inputs), ...vectors, samples]) input.addEventListener('input', onChange);
  mode.addEventListener('change', onChange);
  measure.addEventListener('click', onMeasure);
  surveyButton.addEventListener('click', onSurvey);

  const showMode = () => {
    const measured = mode.value !== 'pixel';
    measuredBox.hidden = !measured;
    pixelBox.hidden = measured;
    vectorsBox.hidden = mode.value !== 'vectors';
    modeHint.textContent = MODE_HINTS[mode.value] ?? '';
  };

  const renderSurvey = (survey, chosenGroup) => {
    surveyResult.hidden = !survey;
    if (!survey) return;
    if (survey !== shownSurvey) {
      shownSurvey = survey;
      surveyBody.replaceChildren(...survey.groups.map((r) => {
        const row = document.createElement('tr');
        row.dataset.group = r.group;
        row.dataset.cellDeviation = String(r.cell_deviation);
        row.dataset.relativeError = String(r.relative_error);
        row.className = r.consistent ? '' : 'inconsistent';
        const name = document.createElement('td');
        const button = document.createElement('button');
        button.type = 'button';
        button.textContent = r.group;
        button.title = `Use ${r.group}`;
        button.addEventListener('click', (event) => {
          event.stopPropagation();
          onChooseGroup(r.group);
        });
        name.append(button);
        row.append(name);
        const cells = [
          [String(r.order), 'num'], [percent(r.cell_deviation), 'num'], [percent(r.noise_level), 'num'],
          [r.consistent ? 'yes' : 'no', ''], [percent(r.relative_error), 'num'],
        ];
        for (const [text, className] of cells) {
          const cell = document.createElement('td');
          cell.className = className;
          cell.textContent = text;
          row.append(cell);
        }
        row.addEventListener('click', () => onChooseGroup(r.group));
        return row;
      }));
    }
    for (const row of surveyBody.children) row.classList.toggle('chosen', row.dataset.group === chosenGroup);
  };

  const ensureOption = (name) => {
    if (![...group.options].some((o) => o.value === name)) group.append(new Option(name, name));
  };

  return {
    // lattice: null | { mode: 'detect' } | { mode: 'vectors', a1, a2 }; samples: null or a number.
    read() {
      const [r1, c1, r2, c2] = vectors.map(real);
      const lattice = mode.value === 'detect' ? { mode: 'detect' }
        : mode.value === 'vectors' ? { mode: 'vectors', a1: [r1, c1], a2: [r2, c2] } : null;
      return {
        group: group.value || 'p1',
        cell_rows: whole(inputs.cellRows),
        cell_cols: whole(inputs.cellCols),
        origin: [whole(inputs.originRow) ?? 0, whole(inputs.originCol) ?? 0],
        lattice_coords: inputs.lattice.checked,
        lattice,
        samples: lattice ? whole(samples) : null,
      };
    },
    write(s) {
      if (s.group !== undefined) {
        ensureOption(s.group);
        group.value = s.group;
      }
      if (s.cell_rows !== undefined) inputs.cellRows.value = s.cell_rows ?? '';
      if (s.cell_cols !== undefined) inputs.cellCols.value = s.cell_cols ?? '';
      if (s.origin !== undefined) {
        inputs.originRow.value = s.origin[0];
        inputs.originCol.value = s.origin[1];
      }
      if (s.lattice_coords !== undefined) inputs.lattice.checked = s.lattice_coords;
      if (s.lattice !== undefined) {
        mode.value = s.lattice ? s.lattice.mode : 'pixel';
        if (s.lattice?.mode === 'vectors') {
          [s.lattice.a1[0], s.lattice.a1[1], s.lattice.a2[0], s.lattice.a2[1]].forEach((v, i) => { vectors[i].value = v; });
        }
      }
      if (s.samples !== undefined) samples.value = s.samples ?? '';
      showMode();
    },
    // Puts measured vectors into the typed-vector inputs (rounded to 1e-4 px).
    writeVectors(lattice) {
      [lattice.a1[0], lattice.a1[1], lattice.a2[0], lattice.a2[1]].forEach((v, i) => { vectors[i].value = String(Number(v.toFixed(4))); });
    },
    // check: { problem, groups: [{ name, full, ok, reason }] } from the worker, or null.
    render(state) {
      const check = state.check;
      if (check) {
        const key = JSON.stringify(check.groups);
        if (key !== groupsKey) {
          groupsKey = key;
          const value = group.value;
          group.replaceChildren(...check.groups.map((g) => {
            const short = g.reason && g.reason.length > 72 ? `${g.reason.slice(0, 70)}…` : g.reason;
            const name = g.full === g.name ? g.name : `${g.name} (${g.full})`;
            const option = new Option(g.ok ? name : `${g.name}: ${short}`, g.name);
            option.disabled = !g.ok;
            if (!g.ok) option.title = g.reason;
            return option;
          }));
          if (value) {
            ensureOption(value);
            group.value = value;
          }
        }
      }
      const chosen = check?.groups.find((g) => g.name === group.value);
      reason.textContent = chosen && !chosen.ok ? `${chosen.name} cannot be used here: ${chosen.reason}` : '';
      reason.className = chosen && !chosen.ok ? 'problem' : 'hint';
      // Before any image, an empty cell is not yet a problem.
      const cellEmpty = !inputs.cellRows.value && !inputs.cellCols.value;
      const shown = state.images.length || !cellEmpty ? state.settingsProblem : null;
      problem.textContent = shown ?? (state.images.length ? check?.problem ?? '' : '');
      const s = state.settings;
      showMode();
      if (s.lattice) {
        const m = state.lattice;
        summary.textContent = m ? `${s.group} · ${m.kind} lattice, ${number(m.lengths[0])} px` : `${s.group} · measured lattice`;
      } else {
        summary.textContent = s.cell_rows && s.cell_cols ? `${s.group} · cell ${s.cell_rows} x ${s.cell_cols}` : s.group;
      }
      const m = state.lattice;
      if (m) {
        const f = (v) => v.toFixed(3);
        const sigma = m.uncertainty ? ` (± ${m.uncertainty.lengths.map((u) => u.toFixed(4)).join(', ')} px, ± ${m.uncertainty.angle.toFixed(4)}°; ${m.peaks} spectral peaks)` : '';
        info.textContent = `${m.kind[0].toUpperCase()}${m.kind.slice(1)} lattice: a1 = (${f(m.a1[0])}, ${f(m.a1[1])}) px, a2 = (${f(m.a2[0])}, ${f(m.a2[1])}) px; `
          + `lengths ${m.lengths.map((l) => l.toFixed(4)).join(' and ')} px, angle ${m.angle.toFixed(3)}°${sigma}.`;
        info.dataset.lengths = m.lengths.join(',');
        info.dataset.angle = String(m.angle);
        info.dataset.kind = m.kind;
      } else {
        info.textContent = s.lattice ? 'Measure to see the lattice.' : '';
        delete info.dataset.lengths;
      }
      latticeProblem.textContent = state.latticeProblem ?? '';
      renderSurvey(s.lattice ? state.survey : null, s.group);
      const surveying = state.busy === 'survey';
      surveyProgress.hidden = !surveying;
      if (surveying && state.progress) {
        surveyBar.value = state.progress.fraction;
        surveyText.textContent = `${state.progress.stage} · ${Math.round(state.progress.fraction * 100)} %`;
      } else if (surveying) {
        surveyBar.removeAttribute('value');
        surveyText.textContent = 'starting…';
      }
      const busy = state.busy !== null;
      group.disabled = busy;
      for (const input of [...Object.values(inputs), ...vectors, samples, mode]) input.disabled = busy;
      measure.disabled = busy || !state.images.length;
      surveyButton.disabled = busy || !state.images.length || Boolean(state.settingsProblem);
      surveyButton.textContent = surveying ? 'Surveying…' : 'Survey';
    },
  };
}
