// Builds a minimal grey ICC profile (ICC.1:2001-04, version 2.1 layout) for tests: a monitor-class
// GRAY profile whose only tone curve is a gamma (kTRC curveType with one u8Fixed8 entry).
// Written from the spec's header and tag layouts, not copied from any shipped profile.

const D50 = [0.9642, 1.0, 0.8249]; // PCS illuminant, ICC.1 section 6.3.4.3

function s15Fixed16(v: number): Buffer {
  const b = Buffer.alloc(4);
  b.writeInt32BE(Math.round(v * 65536), 0);
  return b;
}

function pad4(b: Buffer): Buffer {
  return b.length % 4 ? Buffer.concat([b, Buffer.alloc(4 - (b.length % 4))]) : b;
}

function textDescription(text: string): Buffer {
  const ascii = Buffer.from(`${text}\0`, 'latin1');
  const count = Buffer.alloc(4);
  count.writeUInt32BE(ascii.length, 0);
  // Unicode language + count (8 bytes of zero), ScriptCode code + count (3 bytes) and 67 bytes.
  return Buffer.concat([Buffer.from('desc\0\0\0\0', 'latin1'), count, ascii, Buffer.alloc(8 + 3 + 67)]);
}

/**
 * A GRAY profile with tone curve Y = v^gamma, gamma stored as u8Fixed8 (so 1.8 becomes 461/256).
 * Returns the profile and the gamma as stored.
 */
export function greyGammaProfile(gamma: number): { icc: Buffer; gamma: number } {
  const stored = Math.round(gamma * 256);
  const curve = Buffer.alloc(14);
  curve.write('curv', 0, 'latin1');
  curve.writeUInt32BE(1, 8);
  curve.writeUInt16BE(stored, 12);
  const tags: [string, Buffer][] = [
    ['desc', textDescription(`kinhue test grey gamma ${gamma}`)],
    ['wtpt', Buffer.concat([Buffer.from('XYZ \0\0\0\0', 'latin1'), ...D50.map(s15Fixed16)])],
    ['kTRC', curve],
    ['cprt', Buffer.from('text\0\0\0\0No copyright, test data\0', 'latin1')],
  ];
  const tableSize = 4 + tags.length * 12;
  let offset = 128 + tableSize;
  const table = Buffer.alloc(tableSize);
  table.writeUInt32BE(tags.length, 0);
  const bodies: Buffer[] = [];
  tags.forEach(([sig, data], i) => {
    table.write(sig, 4 + i * 12, 'latin1');
    table.writeUInt32BE(offset, 8 + i * 12);
    table.writeUInt32BE(data.length, 12 + i * 12);
    const padded = pad4(data);
    bodies.push(padded);
    offset += padded.length;
  });
  const header = Buffer.alloc(128);
  header.writeUInt32BE(offset, 0);
  header.writeUInt32BE(0x02100000, 8);
  header.write('mntr', 12, 'latin1');
  header.write('GRAY', 16, 'latin1');
  header.write('XYZ ', 20, 'latin1');
  header.write('acsp', 36, 'latin1');
  D50.forEach((v, i) => s15Fixed16(v).copy(header, 68 + i * 4));
  return { icc: Buffer.concat([header, table, ...bodies]), gamma: stored / 256 };
}
