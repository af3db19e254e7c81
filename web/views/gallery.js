// The generators: one tile per generator with the share of the stack's
// energy it captures; a generator whose layer is empty "adds nothing".
// Generators beyond the chosen count are dimmed.

import { percent } from '../format.js';

export function createGallery() {
  const gallery = document.getElementById('gallery');
  const hint = document.getElementById('gallery-hint');
  let shown = null;

  return {
    // pictures: generator pictures; infos: report.generators (or null for a model file); chosen: count in use.
    render(pictures, infos, chosen, source) {
      if (shown !== pictures) {
        shown = pictures;
        gallery.replaceChildren(...(pictures ?? []).map((picture, l) => {
          const figure = document.createElement('figure');
          const canvas = document.createElement('canvas');
          canvas.width = picture.width;
          canvas.height = picture.height;
          canvas.getContext('2d').putImageData(new ImageData(picture.rgba, picture.width, picture.height), 0, 0);
          canvas.setAttribute('role', 'img');
          const caption = document.createElement('figcaption');
          const info = infos?.[l];
          if (info && info.layer_dimension === 0) {
            figure.classList.add('nothing');
            caption.textContent = `${l + 1} · adds nothing`;
          } else if (info) {
            caption.textContent = `${l + 1} · ${percent(info.captured_share)}`;
          } else {
            caption.textContent = `${l + 1}`;
          }
          canvas.setAttribute('aria-label', `Generator ${caption.textContent}`);
          figure.dataset.generator = String(l + 1);
          figure.append(canvas, caption);
          return figure;
        }));
      }
      for (const figure of gallery.children) {
        figure.classList.toggle('unused', Number(figure.dataset.generator) > chosen);
      }
      if (!pictures?.length) hint.textContent = 'Fit the stack or open a model to see its generators.';
      else if (infos) hint.textContent = `Share of the stack's energy each generator captures. Using ${chosen} of ${pictures.length}.`;
      else hint.textContent = `Generators of the model from ${source}.`;
    },
  };
}
