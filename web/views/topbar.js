// The top bar: Copy settings link, Save model, and the Export dialog.

export function createTopbar({ onSaveModel, onExport, settingsLink }) {
  const copy = document.getElementById('copy-link');
  const save = document.getElementById('save-model');
  const open = document.getElementById('export-open');
  const dialog = document.getElementById('export-dialog');
  const download = document.getElementById('export-download');
  const status = document.getElementById('export-status');
  const parts = {
    pictures: document.getElementById('export-pictures'),
    arrays: document.getElementById('export-arrays'),
    tables: document.getElementById('export-tables'),
    report: document.getElementById('export-report'),
  };

  copy.addEventListener('click', async () => {
    const link = settingsLink();
    try {
      await navigator.clipboard.writeText(link);
      copy.textContent = 'Link copied';
    } catch {
      // No clipboard (e.g. a page opened from disk): the address bar holds the link.
      copy.textContent = 'Link is in the address bar';
    }
    setTimeout(() => { copy.textContent = 'Copy settings link'; }, 2000);
  });
  save.addEventListener('click', onSaveModel);
  open.addEventListener('click', () => {
    status.textContent = '';
    dialog.showModal();
  });
  download.addEventListener('click', async () => {
    const chosen = Object.fromEntries(Object.entries(parts).map(([k, v]) => [k, v.checked]));
    if (!Object.values(chosen).some(Boolean)) {
      status.textContent = 'Choose at least one kind of file.';
      return;
    }
    download.disabled = true;
    status.textContent = 'Preparing files…';
    try {
      status.textContent = await onExport(chosen);
    } catch (error) {
      status.textContent = `Export failed: ${error.message ?? error}`;
    } finally {
      download.disabled = false;
    }
  });

  return {
    render(state) {
      save.disabled = !state.model || state.busy !== null;
      open.disabled = !state.model || state.busy !== null;
      parts.report.disabled = !state.fit;
      parts.tables.disabled = !state.fit && !state.errors;
    },
  };
}
