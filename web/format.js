// How numbers are shown. Exported files keep full precision; these are for
// display only.

// 0.00834 -> "0.83 %"
export function percent(fraction) {
  if (!Number.isFinite(fraction)) return '–';
  const p = fraction * 100;
  if (p === 0) return '0 %';
  if (Math.abs(p) >= 10) return `${p.toFixed(1)} %`;
  if (Math.abs(p) >= 0.01) return `${p.toFixed(2)} %`;
  return `${p.toExponential(1)} %`;
}

// A value with 4 significant digits, switching to exponent form when small or large.
export function number(value) {
  if (!Number.isFinite(value)) return '–';
  if (value === 0) return '0';
  const a = Math.abs(value);
  if (a >= 1e-3 && a < 1e5) return String(Number(value.toPrecision(4)));
  return value.toExponential(3);
}

// "256 x 256" (height x width)
export function size(height, width) {
  return `${height} x ${width}`;
}

// One CSV field: quoted when it holds a comma, quote or line break (RFC 4180).
export function csvField(value) {
  const text = typeof value === 'number' ? String(value) : String(value ?? '');
  return /[",\r\n]/.test(text) ? `"${text.replaceAll('"', '""')}"` : text;
}

export function csv(header, rows) {
  return [header, ...rows].map((row) => row.map(csvField).join(',')).join('\r\n') + '\r\n';
}
