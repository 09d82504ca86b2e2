import zlib from 'node:zlib';

/** Small, valid PNG files made in the test (no image library): RGB, 8 bits, one IDAT chunk. */

const CRC_TABLE = Array.from({ length: 256 }, (_, n) => {
  let c = n;
  for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
  return c >>> 0;
});

function crc32(buf: Buffer): number {
  let c = 0xffffffff;
  for (const b of buf) c = CRC_TABLE[(c ^ b) & 0xff] ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}

function chunk(type: string, data: Buffer): Buffer {
  const len = Buffer.alloc(4);
  len.writeUInt32BE(data.length);
  const body = Buffer.concat([Buffer.from(type, 'ascii'), data]);
  const crc = Buffer.alloc(4);
  crc.writeUInt32BE(crc32(body));
  return Buffer.concat([len, body, crc]);
}

export type Rgb = [number, number, number];

/** A PNG whose pixel (x, y) has the colour `paint(x, y)`. */
export function makePng(width: number, height: number, paint: (x: number, y: number) => Rgb): Buffer {
  const raw = Buffer.alloc((width * 3 + 1) * height);
  for (let y = 0; y < height; y++) {
    const row = y * (width * 3 + 1);
    raw[row] = 0; // filter: none
    for (let x = 0; x < width; x++) {
      const [r, g, b] = paint(x, y);
      raw.set([r, g, b], row + 1 + x * 3);
    }
  }
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(width, 0);
  ihdr.writeUInt32BE(height, 4);
  ihdr.set([8, 2, 0, 0, 0], 8); // 8-bit RGB, deflate, no filter, no interlace
  return Buffer.concat([
    Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]),
    chunk('IHDR', ihdr),
    chunk('IDAT', zlib.deflateSync(raw)),
    chunk('IEND', Buffer.alloc(0)),
  ]);
}

/** Something that reads as a site drawing: lawn, a building, a path and a pool. */
export function sitePlanPng(width = 960, height = 600): Buffer {
  return makePng(width, height, (x, y) => {
    const u = x / width;
    const v = y / height;
    if (u > 0.35 && u < 0.65 && v > 0.3 && v < 0.62) return [196, 190, 180]; // building
    if (Math.abs(v - 0.78) < 0.025) return [224, 214, 190]; // path
    if ((u - 0.82) ** 2 + ((v - 0.3) * 0.6) ** 2 < 0.006) return [140, 200, 230]; // pool
    if (u < 0.04 || u > 0.96 || v < 0.05 || v > 0.95) return [150, 120, 90]; // boundary
    return (Math.floor(x / 24) + Math.floor(y / 24)) % 2 ? [178, 214, 160] : [170, 208, 152]; // lawn
  });
}
