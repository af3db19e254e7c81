// Card 2, Symmetry: the plane group (groups that do not fit the cell and
// image size are disabled with a one-line reason), the unit cell on the
// pixel grid, the origin, and whether images are in lattice coordinates.

const whole = (input) => (input.value.trim() === '' ? null : Number(input.value));

export function createSymmetryCard({ onChange }) {
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
  let groupsKey = '';
  group.addEventListener('change', onChange);
  for (const input of Object.values(inputs)) input.addEventListener('input', onChange);

  const ensureOption = (name) => {
    if (![...group.options].some((o) => o.value === name)) group.append(new Option(name, name));
  };

  return {
    read() {
      return {
        group: group.value || 'p1',
        cell_rows: whole(inputs.cellRows),
        cell_cols: whole(inputs.cellCols),
        origin: [whole(inputs.originRow) ?? 0, whole(inputs.originCol) ?? 0],
        lattice_coords: inputs.lattice.checked,
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
      summary.textContent = s.cell_rows && s.cell_cols ? `${s.group} · cell ${s.cell_rows} x ${s.cell_cols}` : s.group;
      const busy = state.busy !== null;
      group.disabled = busy;
      for (const input of Object.values(inputs)) input.disabled = busy;
    },
  };
}
