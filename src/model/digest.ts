// SHA-256 of bytes or text, hex: the hashes model folders, the backbone and the face finder are checked by.
import { createHash } from 'node:crypto';

/**
 * SHA-256 of bytes, hex.
 * @example
 *   sha256(Buffer.from('')); // 'e3b0c442...'
 */
export function sha256(data: Uint8Array | string): string {
  return createHash('sha256').update(data).digest('hex');
}
