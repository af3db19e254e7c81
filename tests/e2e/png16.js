// A tiny 16-bit grey PNG writer for test images (PNG specification, ISO/IEC
// 15948: signature, IHDR, one IDAT of zlib data with filter 0 rows, IEND).

import { deflateSync } from 'node:zlib';

const CRC_TABLE = Array.from({ length: 256 }, (_, n) => {
  let c = n;
  for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
  return c >>> 0;
});

// CRC-32 (ISO 3309), as PNG chunks and zip entries use.
export function crc32(bytes) {
  let c = 0xffffffff;
  for (const b of bytes) c = CRC_TABLE[(c ^ b) & 0xff] ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}

function chunk(type, data) {
  const out = Buffer.alloc(12 + data.length);
  out.writeUInt32BE(data.length, 0);
  out.write(type, 4, 'ascii');
  data.copy(out, 8);
  out.writeUInt32BE(crc32(out.subarray(4, 8 + data.length)), 8 + data.length);
  return out;
}

// levels: row-major 16-bit values (0..65535), height x width.
export function png16(height, width, levels) {
  const header = Buffer.alloc(13);
  header.writeUInt32BE(width, 0);
  header.writeUInt32BE(height, 4);
  header[8] = 16; // bit depth
  header[9] = 0; // colour type: grey
  const raw = Buffer.alloc(height * (1 + 2 * width));
  for (let r = 0; r < height; r++) {
    const row = r * (1 + 2 * width);
    raw[row] = 0; // filter: none
    for (let c = 0; c < width; c++) raw.writeUInt16BE(levels[r * width + c], row + 1 + 2 * c);
  }
  return Buffer.concat([
    Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]),
    chunk('IHDR', header),
    chunk('IDAT', deflateSync(raw)),
    chunk('IEND', Buffer.alloc(0)),
  ]);
}

// Deterministic pseudo-random 16-bit levels (linear congruential generator,
// Numerical Recipes constants).
export function noiseLevels(count, seed) {
  let x = seed >>> 0;
  const out = new Array(count);
  for (let i = 0; i < count; i++) {
    x = (Math.imul(x, 1664525) + 1013904223) >>> 0;
    out[i] = x >>> 16;
  }
  return out;
}
