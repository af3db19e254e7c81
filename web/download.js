// Saving files the page made: a download through a Blob URL (nothing leaves
// the computer), and reading files the user chose.

export function downloadFile(name, bytes, type = 'application/octet-stream') {
  const url = URL.createObjectURL(new Blob([bytes], { type }));
  const link = document.createElement('a');
  link.href = url;
  link.download = name;
  document.body.append(link);
  link.click();
  link.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10000);
}

// File -> { name, bytes: ArrayBuffer }.
export async function readFile(file) {
  return { name: file.name, bytes: await file.arrayBuffer() };
}
