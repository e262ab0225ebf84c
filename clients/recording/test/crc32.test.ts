import { crc32 as zlibCrc32 } from 'node:zlib';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { crc32 } from '../crc32.js';

const ascii = (s: string) => Uint8Array.from(Buffer.from(s, 'latin1'));

describe('CRC-32 (ISO-HDLC)', () => {
  it('gives the catalogue check value', () => {
    // CRC catalogue (reveng), CRC-32/ISO-HDLC: check = CRC of ASCII "123456789" = 0xCBF43926.
    expect(crc32(ascii('123456789'))).toBe(0xcbf43926);
    // Empty input: init and final XOR cancel (from the definition).
    expect(crc32(new Uint8Array(0))).toBe(0);
  });

  it('continues a running CRC across chunks', () => {
    expect(crc32(ascii('6789'), crc32(ascii('12345')))).toBe(0xcbf43926);
  });

  it('agrees with zlib (Node’s built-in reference implementation) on random data', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 2000 }), (bytes) => {
        expect(crc32(bytes)).toBe(zlibCrc32(bytes));
      }),
    );
  });
});
