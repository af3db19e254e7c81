// Settings in the URL fragment, never data:
//   #group=p4m&cell=16x16&origin=0,0&L=4&band=frequencies:120&lattice=1
//   #group=p6m&measure=detect&samples=10&L=1&band=frequencies:61
//   #group=p6m&measure=vectors&a1=9.18,2.807&a2=2.159,9.354&L=1
// (lattice=1: images in lattice coordinates; measure: a measured lattice,
// from the images or two typed vectors in pixels, (row, column)).
// Opening such a link restores the controls; nothing is sent anywhere (a
// fragment never leaves the browser).

export function settingsToFragment(s) {
  const params = new URLSearchParams();
  if (s.group) params.set('group', s.group);
  if (s.lattice) {
    params.set('measure', s.lattice.mode);
    if (s.lattice.mode === 'vectors') {
      params.set('a1', s.lattice.a1.join(','));
      params.set('a2', s.lattice.a2.join(','));
    }
    if (s.samples) params.set('samples', String(s.samples));
  } else {
    if (s.cell_rows && s.cell_cols) params.set('cell', `${s.cell_rows}x${s.cell_cols}`);
    params.set('origin', `${s.origin[0]},${s.origin[1]}`);
  }
  if (s.generators) params.set('L', String(s.generators));
  if (s.band) params.set('band', `${s.band.kind}:${s.band.value}`);
  if (s.lattice_coords) params.set('lattice', '1');
  return '#' + params.toString().replaceAll('%3A', ':').replaceAll('%2C', ',');
}

// Parses a fragment; returns only the settings it gives, each checked.
export function settingsFromFragment(fragment) {
  const params = new URLSearchParams(fragment.replace(/^#/, ''));
  const out = {};
  const whole = (text) => (/^\d+$/.test(text) ? Number(text) : null);
  const group = params.get('group');
  if (group && /^[a-z0-9]+(:ba)?$/i.test(group)) out.group = group.toLowerCase();
  const cell = params.get('cell')?.split('x');
  if (cell?.length === 2 && whole(cell[0]) && whole(cell[1])) {
    out.cell_rows = whole(cell[0]);
    out.cell_cols = whole(cell[1]);
  }
  const origin = params.get('origin')?.split(',');
  if (origin?.length === 2 && whole(origin[0]) !== null && whole(origin[1]) !== null) {
    out.origin = [whole(origin[0]), whole(origin[1])];
  }
  const generators = whole(params.get('L') ?? '');
  if (generators) out.generators = generators;
  const band = params.get('band')?.split(':');
  if (band?.length === 2 && ['frequencies', 'radius'].includes(band[0]) && Number.isFinite(Number(band[1])) && band[1] !== '') {
    out.band = { kind: band[0], value: Number(band[1]) };
  } else if (params.get('band') === 'none') {
    out.band = null;
  }
  if (params.has('lattice')) out.lattice_coords = params.get('lattice') === '1';
  const vector = (text) => {
    const parts = (text ?? '').split(',');
    const numbers = parts.map((p) => (p.trim() === '' ? NaN : Number(p)));
    return parts.length === 2 && numbers.every(Number.isFinite) ? numbers : null;
  };
  const measure = params.get('measure');
  if (measure === 'detect') {
    out.lattice = { mode: 'detect' };
  } else if (measure === 'vectors' && vector(params.get('a1')) && vector(params.get('a2'))) {
    out.lattice = { mode: 'vectors', a1: vector(params.get('a1')), a2: vector(params.get('a2')) };
  } else if (out.group && !measure) {
    // a settings link without a measured lattice means the pixel grid
    out.lattice = null;
  }
  if (out.lattice !== undefined) out.samples = out.lattice ? whole(params.get('samples') ?? '') : null;
  return out;
}
