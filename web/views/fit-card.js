// Card 3, Fit: the number of generators, the band limit, Fit and Cancel,
// and the progress bar (stage and fraction).

import { percent } from '../format.js';

export function createFitCard({ onChange, onFit, onCancel }) {
  const generators = document.getElementById('generators');
  const bandKind = document.getElementById('band-kind');
  const bandValue = document.getElementById('band-value');
  const fit = document.getElementById('fit');
  const cancel = document.getElementById('cancel');
  const progress = document.getElementById('fit-progress');
  const bar = document.getElementById('progress-bar');
  const text = document.getElementById('progress-text');
  const status = document.getElementById('fit-status');
  const summary = document.getElementById('fit-summary');
  const blocker = document.getElementById('fit-blocker');

  generators.addEventListener('input', onChange);
  bandValue.addEventListener('input', onChange);
  bandKind.addEventListener('change', () => {
    bandValue.hidden = bandKind.value === 'none';
    bandValue.step = bandKind.value === 'frequencies' ? '1' : 'any';
    bandValue.setAttribute('aria-label', bandKind.value === 'frequencies' ? 'Number of frequencies M' : 'Radius R in cycles per image');
    onChange();
  });
  fit.addEventListener('click', onFit);
  cancel.addEventListener('click', onCancel);

  return {
    read() {
      const kind = bandKind.value;
      return {
        generators: generators.value.trim() === '' ? null : Number(generators.value),
        band: kind === 'none' ? null : { kind, value: bandValue.value.trim() === '' ? null : Number(bandValue.value) },
      };
    },
    write(s) {
      if (s.generators !== undefined) generators.value = s.generators;
      if (s.band !== undefined) {
        bandKind.value = s.band ? s.band.kind : 'none';
        bandValue.value = s.band ? s.band.value : '';
        bandValue.hidden = !s.band;
      }
    },
    render(state) {
      const fitting = state.busy === 'fit';
      fit.disabled = state.busy !== null || !state.canFit;
      fit.textContent = fitting ? 'Fitting…' : 'Fit';
      cancel.hidden = !fitting;
      progress.hidden = !fitting;
      if (fitting && state.progress) {
        bar.value = state.progress.fraction;
        text.textContent = `${state.progress.stage} · ${Math.round(state.progress.fraction * 100)} %`;
      } else if (fitting) {
        bar.removeAttribute('value');
        text.textContent = 'starting…';
      }
      generators.disabled = bandKind.disabled = state.busy !== null;
      bandValue.disabled = state.busy !== null;
      status.textContent = state.fitStatus ?? '';
      status.className = state.fitStatusIsProblem ? 'status problem' : 'status';
      blocker.textContent = state.busy === null && state.fitBlocker ? state.fitBlocker : '';
      const fitResult = state.fit;
      if (fitResult) {
        const last = fitResult.report.error_curve[fitResult.report.error_curve.length - 1];
        summary.textContent = `L = ${last.generators} · ${percent(last.relative_error)} error`;
      } else {
        summary.textContent = '';
      }
    },
    focusFit() {
      fit.focus();
    },
  };
}
