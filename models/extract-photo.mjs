#!/usr/bin/env node
// Copies one photo out of an unpacked Debian package, byte for byte (no re-encoding).
// Used by gather-photos.sh for the containers that are not plain files:
//   <file.rcc>!<inner/path>  a Qt binary resource file (rcc formats 1-3; zlib-compressed entries inflated)
//   <file.edj>!largest-jpeg  an Edje file: the largest JPEG stream stored inside it (the full-size picture)
//   <file.jar>!<inner/path>  a Java archive or other zip file (stored or deflated entries; CRC-32 checked)
// Usage: node models/extract-photo.mjs <package-root> <path-in-package> <out-file>
import { readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { crc32, inflateRawSync, inflateSync } from 'node:zlib';
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

/** The bytes of one entry of a zip file (a .jar is one), checked against the CRC-32 and size the archive records. */
function readZipEntry(buf, inner) {
  // End of central directory: signature 0x06054b50, at most 65535 bytes of comment after it
  let eocd = -1;
  for (let i = buf.length - 22; i >= Math.max(0, buf.length - 22 - 65535); i--) {
    if (buf.readUInt32LE(i) === 0x06054b50) {
      eocd = i;
      break;
    }
  }
  if (eocd < 0) throw new Error('not a zip file (no end of central directory)');
  const count = buf.readUInt16LE(eocd + 10);
  let p = buf.readUInt32LE(eocd + 16);
  if (count === 0xffff || p === 0xffffffff) throw new Error('zip64 archives are not supported');
  for (let k = 0; k < count; k++) {
    if (buf.readUInt32LE(p) !== 0x02014b50) throw new Error('damaged zip central directory');
    const method = buf.readUInt16LE(p + 10);
    const crc = buf.readUInt32LE(p + 16);
    const packed = buf.readUInt32LE(p + 20);
    const size = buf.readUInt32LE(p + 24);
    const nameLen = buf.readUInt16LE(p + 28);
    const extraLen = buf.readUInt16LE(p + 30);
    const commentLen = buf.readUInt16LE(p + 32);
    const local = buf.readUInt32LE(p + 42);
    const name = buf.toString('utf8', p + 46, p + 46 + nameLen);
    p += 46 + nameLen + extraLen + commentLen;
    if (name !== inner) continue;
    // the local header repeats the name and has its own extra field: skip both to reach the data
    const start = local + 30 + buf.readUInt16LE(local + 26) + buf.readUInt16LE(local + 28);
    const body = buf.subarray(start, start + packed);
    let bytes;
    if (method === 0) bytes = Buffer.from(body);
    else if (method === 8) bytes = inflateRawSync(body);
    else throw new Error(`${inner}: zip compression method ${method} is not supported`);
    if (bytes.length !== size || crc32(bytes) !== crc) throw new Error(`${inner}: size or CRC-32 does not match the archive's record`);
    return bytes;
  }
  return null;
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
  } else if (container.endsWith('.jar') || container.endsWith('.zip')) {
    bytes = readZipEntry(buf, inner);
    if (!bytes) throw new Error(`${container}: no entry ${inner}`);
  } else if (container.endsWith('.edj') && inner === 'largest-jpeg') bytes = await largestJpeg(buf);
  else throw new Error(`unknown container in ${spec}`);
  mkdirSync(dirname(out), { recursive: true });
  writeFileSync(out, bytes);
}

main().catch((e) => {
  console.error(`extract-photo: ${process.argv[3]}: ${e.message}`);
  process.exit(1);
});
