#!/usr/bin/env node
// Copies one photo out of an unpacked Debian package, byte for byte (no re-encoding).
// Used by gather-photos.sh for the two containers that are not plain files:
//   <file.rcc>!<inner/path>  a Qt binary resource file (rcc formats 1-3; zlib-compressed entries inflated)
//   <file.edj>!largest-jpeg  an Edje file: the largest JPEG stream stored inside it (the full-size picture)
// Usage: node models/extract-photo.mjs <package-root> <path-in-package> <out-file>
import { readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { inflateSync } from 'node:zlib';
import sharp from 'sharp';

/** Entries of a Qt rcc file as a Map from inner path to a function returning its bytes. */
function readRcc(buf) {
  if (buf.toString('latin1', 0, 4) !== 'qres') throw new Error('not a Qt resource file (no "qres" magic)');
  const version = buf.readUInt32BE(4);
  const tree = buf.readUInt32BE(8);
  const data = buf.readUInt32BE(12);
  const names = buf.readUInt32BE(16);
  const nodeSize = version >= 2 ? 22 : 14; // version 2 added a 64-bit modification time per node
  const nameAt = (off) => {
    const len = buf.readUInt16BE(names + off);
    let s = '';
    for (let i = 0; i < len; i++) s += String.fromCharCode(buf.readUInt16BE(names + off + 6 + 2 * i));
    return s;
  };
  const entries = new Map();
  const walk = (index, prefix) => {
    const p = tree + index * nodeSize;
    const flags = buf.readUInt16BE(p + 4);
    const here = index === 0 ? '' : prefix + nameAt(buf.readUInt32BE(p));
    if (flags & 2) {
      const count = buf.readUInt32BE(p + 6);
      const first = buf.readUInt32BE(p + 10);
      for (let k = 0; k < count; k++) walk(first + k, here === '' ? '' : here + '/');
      return;
    }
    const off = buf.readUInt32BE(p + 10);
    entries.set(here, () => {
      const size = buf.readUInt32BE(data + off);
      const body = buf.subarray(data + off + 4, data + off + 4 + size);
      if (flags & 4) throw new Error(`${here}: zstd-compressed rcc entries are not supported`);
      // qCompress format: 4-byte big-endian uncompressed length, then a zlib stream
      return flags & 1 ? inflateSync(body.subarray(4)) : Buffer.from(body);
    });
  };
  walk(0, '');
  return entries;
}

/** The largest decodable JPEG stream embedded in a buffer (Edje stores lossy images as JPEG). */
async function largestJpeg(buf) {
  const soi = Buffer.from([0xff, 0xd8, 0xff]);
  const eoi = Buffer.from([0xff, 0xd9]);
  const starts = [];
  for (let i = buf.indexOf(soi); i >= 0; i = buf.indexOf(soi, i + 3)) starts.push(i);
  let best = null;
  for (let k = 0; k < starts.length; k++) {
    const seg = buf.subarray(starts[k], k + 1 < starts.length ? starts[k + 1] : buf.length);
    const last = seg.lastIndexOf(eoi);
    if (last < 0) continue;
    const jpeg = seg.subarray(0, last + 2);
    try {
      const m = await sharp(jpeg).metadata();
      if (!best || m.width * m.height > best.pixels) best = { pixels: m.width * m.height, jpeg };
    } catch {
      // an embedded thumbnail or a false marker: not a whole picture
    }
  }
  if (!best) throw new Error('no JPEG stream found');
  return Buffer.from(best.jpeg);
}

async function main() {
  const [root, spec, out] = process.argv.slice(2);
  if (!root || !spec || !out) {
    console.error('Usage: node models/extract-photo.mjs <package-root> <path-in-package> <out-file>');
    process.exit(2);
  }
  const [container, inner] = spec.split('!');
  const buf = readFileSync(join(root, container));
  let bytes;
  if (inner === undefined) bytes = buf;
  else if (container.endsWith('.rcc')) {
    const get = readRcc(buf).get(inner);
    if (!get) throw new Error(`${container}: no entry ${inner}`);
    bytes = get();
  } else if (container.endsWith('.edj') && inner === 'largest-jpeg') bytes = await largestJpeg(buf);
  else throw new Error(`unknown container in ${spec}`);
  mkdirSync(dirname(out), { recursive: true });
  writeFileSync(out, bytes);
}

main().catch((e) => {
  console.error(`extract-photo: ${process.argv[3]}: ${e.message}`);
  process.exit(1);
});
